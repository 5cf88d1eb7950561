"""``geosample size`` (implemented with the sizing engine)."""
