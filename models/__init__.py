"""uvdose physics: solar geometry, clear-sky spectral UV, action spectra and doses.

Pure functions on numpy arrays. Nothing here knows about HTTP, JSON or caches.
"""

MODEL_VERSION = "0.5.0"
"""Version of the numerical model. Bump it whenever a change alters any number the
engine returns; cache keys include it so a changed engine never serves stale values."""
