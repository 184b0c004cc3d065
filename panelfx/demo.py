"""An invented demo cohort and the ``python -m panelfx demo`` command.

Everything here is **invented**: the clinic network, its sites, the drug and every
number are made up by :func:`cohort` from a seeded random generator.  The data exist to
show panelfx at work and to carry known answers (the true dose effects) that an
analysis can be checked against.  They describe no real people, clinics or medicine.
"""

from __future__ import annotations

import argparse
from collections.abc import Sequence

import numpy as np
import pandas as pd

#: The invented scenario, as printed by the demo and stored in ``frame.attrs["invented"]``.
SCENARIO = (
    "INVENTED DATA: the Kestrel Valley Hypertension Network (a made-up outpatient clinic "
    "network) follows adults after enrolment on the made-up drug 'pressolan'. No real "
    "people, clinics or medicine."
)

#: Names of the invented sites; ``n_sites`` takes the first ones.
SITES = ("Alder Row", "Brookfield", "Carrow Quay", "Dunmere", "Elmstead", "Fenwick", "Greyhaven", "Holloway")

#: Calendar day of the first possible enrolment; enrolment is spread over two years from it.
FIRST_ENROLMENT = np.datetime64("2023-01-02")

#: Planned interval between visits, days.
SPACING_DAYS = 30

#: Mean systolic pressure (mmHg) of an untreated subject with a zero start dose and average salt.
SBP_LEVEL = 152.0

#: Average daily salt intake (g); salt enters the pressure centred on it.
SALT_MEAN = 8.0


def cohort(
    n_subjects: int = 200,
    *,
    seed: int = 2026,
    n_sites: int = 5,
    within_effect: float = -0.3,
    between_effect: float = 0.2,
    salt_effect: float = 1.0,
    sbp_missing: float = 0.05,
    salt_missing: float = 0.08,
    shuffle: bool = True,
) -> pd.DataFrame:
    """An invented cohort of a made-up hypertension clinic network, one row per visit.

    **Invented scenario**: the *Kestrel Valley Hypertension Network* (it does not exist)
    enrols adults with raised blood pressure at ``n_sites`` sites over two years and
    sees them about every 30 days.  After one to three visits without treatment each
    subject starts the (equally made-up) drug *pressolan*; the dose is then titrated up
    or down now and then.  Same ``seed``, same frame, on any machine.

    Columns:

    - ``site`` (str) and ``subject`` (int): subject numbers restart at 1 at every site,
      so the subject id is ``["site", "subject"]``;
    - ``visit_date`` (datetime64) and ``day`` (int, days since the subject's enrolment):
      visits are planned every 30 days from enrolment (day 0) but come a few days
      early or late (at most 2), about 4% come 8-14 days late and 3% 8-14 days early,
      and about 7% of planned visits after the first are missed;
    - ``sbp`` (float, mmHg): systolic blood pressure, the outcome; a share
      ``sbp_missing`` (MCAR) is missing;
    - ``dose_mg`` (float): daily dose of pressolan the subject is on at the visit; 0
      before the treatment start, then a start dose of 5-50 mg, moved up or down in
      5 mg steps (kept within 5-60 mg), the steps drawn at random, independently of the
      subject's pressure;
    - ``treat_start`` (datetime64): the subject's treatment start date, 1-7 days after
      its last untreated visit, constant within subject (the reference time for a "last
      value on or before the start" baseline);
    - ``salt_g`` (float): estimated daily salt intake, a time-varying covariate; a share
      ``salt_missing`` is missing (not recorded; the true intake still acts on ``sbp``);
    - ``dizzy`` (bool): a dizzy spell was reported at the visit, a rare event whose
      chance rises with the dose (about 4% of visits).

    **The true model.**  With ``d0`` the subject's start dose (its first non-zero dose,
    the *baseline dose*), each visit's pressure is ::

        sbp = 152 + between_effect * d0 + within_effect * (dose_mg - d0)
                  + salt_effect * (salt - 8) + u + e

    with ``u`` a subject effect (sd 4.5 mmHg) independent of the doses, and ``e`` visit
    noise (sd 6 mmHg), rounded to 0.1.  So ``within_effect`` (default -0.3 mmHg per mg)
    is what raising one person's dose by 1 mg does to that person's pressure, and
    ``between_effect`` (default +0.2) is the cross-sectional slope across people at
    their start doses: start doses are chosen by indication, so subjects on higher doses
    have *higher* pressure (before treatment their pressure exceeds the others' by
    ``between_effect - within_effect`` = 0.5 mmHg per mg of the dose they go on to get).
    A regression of ``sbp`` on the baseline dose and the change from it (OLS, a
    random-intercept mixed model or a GEE) recovers both effects; the deviation of the
    dose from the subject's mean dose recovers ``within_effect`` exactly as well.  The
    subject's *mean* dose over follow-up is close to its start dose but not equal to it
    (untreated visits count 0, later titration moves it), so a regression on the subject
    mean dose gives a between slope a few hundredths below ``between_effect`` (about
    0.17 instead of 0.2 with the defaults: the mean is a blurred copy of the start dose).
    Only the current dose alone mixes the two into one misleading number.

    Rows come in random order (``shuffle=True``, default) with a fresh 0..n-1 index, or
    sorted by site, subject and visit date.  ``frame.attrs["invented"]`` holds the label
    and ``frame.attrs["truth"]`` the true effects.

    >>> df = cohort(20, seed=1, shuffle=False)
    >>> df.columns.tolist()
    ['site', 'subject', 'visit_date', 'day', 'sbp', 'dose_mg', 'treat_start', 'salt_g', 'dizzy']
    >>> df.attrs["invented"].startswith("INVENTED")
    True
    """
    if isinstance(n_subjects, bool) or not isinstance(n_subjects, (int, np.integer)) or n_subjects < 1:
        raise ValueError(f"n_subjects must be a positive integer, got {n_subjects!r}")
    if not 1 <= n_sites <= len(SITES):
        raise ValueError(f"n_sites must be between 1 and {len(SITES)}, got {n_sites!r}")
    for what, share in (("sbp_missing", sbp_missing), ("salt_missing", salt_missing)):
        if not 0 <= share < 1:
            raise ValueError(f"{what} must be a share in [0, 1), got {share!r}")
    rng = np.random.default_rng(seed)
    n = int(n_subjects)

    # -- subjects: site, number within site, enrolment, schedule length, treatment -------
    weights = np.linspace(1.5, 0.7, n_sites)
    site = rng.choice(n_sites, size=n, p=weights / weights.sum())
    by_site = np.argsort(site, kind="stable")
    counts = np.bincount(site, minlength=n_sites)
    number = np.empty(n, dtype=np.int64)
    number[by_site] = np.arange(n) - np.repeat(np.cumsum(counts) - counts, counts) + 1
    enrol = FIRST_ENROLMENT + rng.integers(0, 730, size=n).astype("timedelta64[D]")
    planned = rng.integers(6, 19, size=n)            # planned visits, 5-18 months of follow-up
    run_in = rng.choice([1, 2, 3], size=n, p=[0.5, 0.35, 0.15])  # untreated visits before the drug
    d0 = np.clip(5.0 * np.rint((20 + 10 * rng.standard_normal(n)) / 5), 5, 50)
    u = 4.5 * rng.standard_normal(n)
    salt_level = SALT_MEAN + 1.5 * rng.standard_normal(n)

    # -- planned visits (slots), before dropping the missed ones ------------------------
    total = int(planned.sum())
    subj = np.repeat(np.arange(n), planned)
    first_slot = np.cumsum(planned) - planned
    k = np.arange(total) - np.repeat(first_slot, planned)
    late = (rng.random(total) < 0.04) & (k > 0)
    early = (rng.random(total) < 0.03) & (k > 0)
    early &= ~late
    early[1:] &= ~late[:-1]  # never early right after a late visit: visits stay >= 14 days apart
    # Everyday jitter is at most 2 days; an early or late visit is 8-14 days off, always
    # outside a quarter of the spacing (7.5 days) and always nearer its own planned day.
    shift = rng.integers(10, 13, size=total)
    day = SPACING_DAYS * k + rng.integers(-2, 3, size=total) + np.where(late, shift, 0) - np.where(early, shift, 0)
    day[k == 0] = 0

    # Treatment starts 1-7 days after the last untreated visit (slot run_in - 1).
    start_day = day[first_slot + run_in - 1] + rng.integers(1, 8, size=n)
    treated = day > start_day[subj]
    step = rng.choice([-5.0, 0.0, 5.0], size=total, p=[0.08, 0.80, 0.12])
    step[~treated | (k == run_in[subj])] = 0.0  # titration only after the first treated visit
    walk = np.cumsum(step)
    walk -= np.repeat(walk[first_slot] - step[first_slot], planned)  # restart the sum per subject
    dose = np.where(treated, np.clip(d0[subj] + walk, 5, 60), 0.0)

    salt_true = np.clip(salt_level[subj] + 1.2 * rng.standard_normal(total), 2.0, None)
    sbp = (SBP_LEVEL + between_effect * d0[subj] + within_effect * (dose - d0[subj])
           + salt_effect * (salt_true - SALT_MEAN) + u[subj] + 6.0 * rng.standard_normal(total))
    dizzy = rng.random(total) < 0.01 + 0.0015 * dose
    sbp = np.where(rng.random(total) < sbp_missing, np.nan, np.round(sbp, 1))
    salt = np.where(rng.random(total) < salt_missing, np.nan, np.round(salt_true, 1))
    # The first treated visit is never missed, so the first non-zero dose is the start dose.
    missed = (rng.random(total) < 0.07) & (k > 0) & (k != run_in[subj])

    keep = ~missed
    s = subj[keep]
    frame = pd.DataFrame({
        "site": np.asarray(SITES, dtype=object)[site[s]],  # pandas' default text dtype
        "subject": number[s],
        "visit_date": (enrol[s] + day[keep].astype("timedelta64[D]")).astype("datetime64[ns]"),
        "day": day[keep].astype(np.int64),
        "sbp": sbp[keep],
        "dose_mg": dose[keep],
        "treat_start": (enrol + start_day.astype("timedelta64[D]")).astype("datetime64[ns]")[s],
        "salt_g": salt[keep],
        "dizzy": dizzy[keep],
    })
    # Sorted by site and subject number (the way a data manager would file them).
    frame = frame.iloc[np.lexsort((frame["day"].to_numpy(), frame["subject"].to_numpy(), site[s]))]
    if shuffle:
        frame = frame.iloc[rng.permutation(len(frame))]
    frame = frame.reset_index(drop=True)
    frame.attrs["invented"] = SCENARIO
    frame.attrs["truth"] = {"within_effect": within_effect, "between_effect": between_effect,
                            "salt_effect": salt_effect}
    return frame


# ---------------------------------------------------------------------------- command
ID = ["site", "subject"]
TIME = "visit_date"


def history_transforms() -> list:
    """The demo's history variables, as one list for a single :func:`panelfx.derive` call."""
    import panelfx as pfx

    return [
        pfx.baseline("sbp", rule="last_before", reference="treat_start"),
        pfx.change_from_baseline("sbp", rule="last_before", reference="treat_start"),
        pfx.change_from_previous("sbp"),
        pfx.lag("dose_mg"),
        pfx.cumulative("dose_mg", "step", name="dose_total_mg"),  # daily dose held until the next visit
        pfx.time_since("dizzy"),
        pfx.rolling("sbp", "mean", span="90D"),
        pfx.within_between("dose_mg"),
    ]


def main(argv: Sequence[str] | None = None) -> int:
    """``python -m panelfx demo [--subjects N] [--seed S] [--rows R]``."""
    import panelfx as pfx

    parser = argparse.ArgumentParser(prog="python -m panelfx demo",
                                     description="Run panelfx on an invented hypertension clinic cohort.")
    parser.add_argument("--subjects", type=int, default=200, help="number of invented subjects (default 200)")
    parser.add_argument("--seed", type=int, default=2026, help="random seed (default 2026)")
    parser.add_argument("--rows", type=int, default=8, help="rows of the result to print (default 8)")
    args = parser.parse_args(list(argv) if argv is not None else None)
    if args.subjects < 1:
        parser.error("--subjects must be at least 1")

    df = cohort(args.subjects, seed=args.seed)
    truth = df.attrs["truth"]
    print(SCENARIO)
    print(f"Generated by panelfx.demo.cohort({args.subjects}, seed={args.seed}): {len(df)} visits of "
          f"{df.groupby(ID).ngroups} subjects at {df['site'].nunique()} sites (subject numbers restart at "
          f"every site, so the id is {ID}); rows come shuffled.")
    print(f"True dose effects built in: within-subject {truth['within_effect']:+g} mmHg per mg, "
          f"between-subject {truth['between_effect']:+g} mmHg per mg.")

    print("\n== 1. panelfx.check(frame, id=['site', 'subject'], time='visit_date', spacing='30D')")
    report = pfx.check(df, id=ID, time=TIME, spacing="30D")
    if report.empty:
        print("no problems found")
    else:
        summary = (report.assign(subject=report["id"].astype(str))
                   .groupby(["problem", "severity"], sort=False)
                   .agg(findings=("problem", "size"), subjects=("subject", "nunique"))
                   .reset_index())
        print(summary.to_string(index=False))

    transforms = history_transforms()
    print(f"\n== 2. panelfx.derive with {len(transforms)} transforms in one call")
    out = pfx.derive(df, *transforms, id=ID, time=TIME)
    print(f"{len(out.columns) - len(df.columns)} columns added; the first rows, sorted for reading:")
    if args.rows > 0:
        # the inputs that matter for the derived columns, then the derived columns
        cols = [*ID, TIME, "treat_start", "sbp", "dose_mg", "dizzy", *out.columns[len(df.columns):]]
        shown = out.sort_values([*ID, TIME], kind="stable").head(args.rows)[cols]
        with pd.option_context("display.width", 250, "display.max_columns", 50):
            print(shown.to_string())

    print("\n== 3. What each derived column means")
    for tr in transforms:
        past = "past-only" if tr.past_only else "uses later occasions"
        for name in tr.outputs():
            print(f"{name}: {tr.describe()} [{past}]")
    return 0


# ---------------------------------------------------------------------------- nested data
#: The invented nested scenario, stored in ``frame.attrs["invented"]`` by :func:`rehab`.
REHAB_SCENARIO = (
    "INVENTED DATA: the Marlow Coast Cardiac Rehabilitation Programme (a made-up programme) "
    "follows patients of clinics grouped in regions through 24 weeks of exercise-based "
    "rehabilitation. No real people, clinics or programme."
)

#: Names of the invented regions; ``n_regions`` takes the first ones.
REGIONS = ("Northmoor", "Eastfen", "Southvale", "Westmarch", "Highcombe", "Lowfield")

#: The invented recovery patterns of the walking distance, with their shares of patients.
PATTERNS = {"steady": 0.40, "early": 0.35, "flat": 0.25}


def rehab(
    n_regions: int = 5,
    *,
    seed: int = 2027,
    clinics: tuple[int, int] = (4, 6),
    patients: tuple[int, int] = (6, 12),
    sd: tuple[float, float, float, float] = (2.0, 2.5, 5.0, 3.5),
    within_effect: float = -0.05,
    between_effect: float = -0.12,
    shuffle: bool = True,
) -> pd.DataFrame:
    """An invented, nested rehabilitation cohort: regions > clinics > patients > visits.

    **Invented scenario**: the *Marlow Coast Cardiac Rehabilitation Programme* (it does
    not exist) runs clinics in ``n_regions`` regions; each patient is seen at weeks 0, 2,
    ..., 24 of the programme, a few days early or late, with about 8% of visits missed
    and about 10% of patients stopping after week 12.  Same ``seed``, same frame.

    Columns: ``region`` (str), ``clinic`` (int, restarting at 1 in every region),
    ``patient`` (int, restarting at 1 in every clinic), so the patient id is
    ``["region", "clinic", "patient"]``; ``week`` (float, weeks since the patient's start,
    one decimal); ``exercise_min`` (weekly minutes of exercise reported at the visit);
    ``rest_hr`` (resting heart rate, beats per minute, about 3% missing); ``walk_m``
    (six-minute walk distance, metres); ``pattern`` (the generator's recovery pattern of
    the patient, "steady", "early" or "flat": a known answer for trajectory grouping).

    **The true model.**  ``rest_hr = 72 + a_region + b_clinic + c_patient
    + between_effect * (m_patient - 150) + within_effect * (exercise_min - m_patient) + e``
    with independent normal effects of standard deviations ``sd`` (region, clinic,
    patient, visit) and ``m_patient`` the patient's usual weekly exercise (its mean over
    visits but for noise).  So ``within_effect`` (default -0.05 bpm per minute) is what
    more exercise in a week does to a patient's heart rate, and ``between_effect`` (-0.12)
    how patients who usually exercise more differ.  ``walk_m`` starts at a patient level
    near 380 m and then follows its pattern: "steady" gains 6 m a week, "early" gains 100 m
    mostly in the first six weeks, "flat" loses 1 m a week; visit noise sd 12 m.
    ``frame.attrs["truth"]`` holds the effects and the variance components of
    ``rest_hr`` the model implies per level (the exercise terms included).

    >>> df = rehab(2, seed=1, shuffle=False)
    >>> df.columns.tolist()
    ['region', 'clinic', 'patient', 'week', 'exercise_min', 'rest_hr', 'walk_m', 'pattern']
    >>> df.attrs["invented"].startswith("INVENTED")
    True
    """
    if isinstance(n_regions, bool) or not isinstance(n_regions, (int, np.integer)) \
            or not 1 <= n_regions <= len(REGIONS):
        raise ValueError(f"n_regions must be between 1 and {len(REGIONS)}, got {n_regions!r}")
    rng = np.random.default_rng(seed)
    # -- units: regions > clinics > patients, numbers restarting within each parent ----------
    n_clin = rng.integers(clinics[0], clinics[1] + 1, size=n_regions)
    clin_region = np.repeat(np.arange(n_regions), n_clin)
    clin_number = np.arange(len(clin_region)) - np.repeat(np.cumsum(n_clin) - n_clin, n_clin) + 1
    n_pat = rng.integers(patients[0], patients[1] + 1, size=len(clin_region))
    pat_clinic = np.repeat(np.arange(len(clin_region)), n_pat)
    pat_number = np.arange(len(pat_clinic)) - np.repeat(np.cumsum(n_pat) - n_pat, n_pat) + 1
    n = len(pat_clinic)
    a = sd[0] * rng.standard_normal(n_regions)
    b = sd[1] * rng.standard_normal(len(clin_region))
    c = sd[2] * rng.standard_normal(n)
    clinic_push = 15.0 * rng.standard_normal(len(clin_region))  # some clinics get patients moving more
    usual = np.clip(150.0 + clinic_push[pat_clinic] + 35.0 * rng.standard_normal(n), 20.0, None)
    pattern = rng.choice(list(PATTERNS), size=n, p=list(PATTERNS.values()))
    start_walk = 380.0 + 45.0 * rng.standard_normal(n)
    stops = rng.random(n) < 0.10

    # -- visits: weeks 0, 2, ..., 24 -----------------------------------------------------------
    planned = np.arange(0, 25, 2)
    pid = np.repeat(np.arange(n), len(planned))
    k = np.tile(planned, n)
    week = np.round(k + np.where(k > 0, rng.uniform(-0.4, 0.4, size=len(k)), 0.0), 1)
    keep = ((rng.random(len(k)) >= 0.08) | (k == 0)) & ~(stops[pid] & (k > 12))
    pid, week = pid[keep], week[keep]
    m = len(pid)
    exercise = np.clip(np.round((usual[pid] + 30.0 * rng.standard_normal(m)) / 5) * 5, 0, None)
    hr = (72.0 + a[clin_region[pat_clinic[pid]]] + b[pat_clinic[pid]] + c[pid]
          + between_effect * (usual[pid] - 150.0) + within_effect * (exercise - usual[pid])
          + sd[3] * rng.standard_normal(m))
    hr = np.where(rng.random(m) < 0.03, np.nan, np.round(hr, 1))
    gain = np.select([pattern[pid] == "steady", pattern[pid] == "early"],
                     [6.0 * week, 100.0 * (1 - np.exp(-week / 2.5))], -1.0 * week)
    walk = np.round(start_walk[pid] + gain + 12.0 * rng.standard_normal(m))

    frame = pd.DataFrame({
        "region": np.asarray(REGIONS, dtype=object)[clin_region[pat_clinic[pid]]],
        "clinic": clin_number[pat_clinic[pid]].astype(np.int64),
        "patient": pat_number[pid].astype(np.int64),
        "week": week,
        "exercise_min": exercise,
        "rest_hr": hr,
        "walk_m": walk,
        "pattern": np.asarray(pattern, dtype=object)[pid],
    })
    if shuffle:
        frame = frame.iloc[rng.permutation(m)].reset_index(drop=True)
    # variance of usual exercise (across patients) and of the weekly noise feed the truth
    spread = float(np.var(usual)) * between_effect**2
    frame.attrs["invented"] = REHAB_SCENARIO
    frame.attrs["truth"] = {
        "within_effect": within_effect, "between_effect": between_effect,
        "rest_hr_components": {"region": sd[0] ** 2, "clinic": sd[1] ** 2, "patient": sd[2] ** 2 + spread,
                               "residual": sd[3] ** 2 + within_effect**2 * 30.0**2},
    }
    return frame


__all__ = ["cohort", "main", "history_transforms", "SCENARIO", "rehab", "REHAB_SCENARIO"]
