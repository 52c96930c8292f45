"""Shared test setup: a headless matplotlib backend and offline astropy."""

import matplotlib

matplotlib.use("Agg")

try:  # rvkep never needs UT1; keep astropy from trying to download IERS tables
    from astropy.utils import iers

    iers.conf.auto_download = False
except Exception:  # pragma: no cover - astropy always present in the test extra
    pass
