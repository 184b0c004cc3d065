"""One module per transform; each exposes a constructor function and its frozen class."""
