import os

import matplotlib

matplotlib.use("Agg")
os.environ.setdefault("MPLBACKEND", "Agg")

# Property tests run the same examples on every machine (CI must not fail by chance); set
# NANOABS_HYPOTHESIS=explore to search new random examples locally.
from hypothesis import settings  # noqa: E402

settings.register_profile("deterministic", derandomize=True, print_blob=True)
settings.register_profile("explore", derandomize=False, print_blob=True)
settings.load_profile("explore" if os.environ.get("NANOABS_HYPOTHESIS") == "explore" else "deterministic")
