"""The numpy array types the numeric code annotates with (one definition for every module)."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]
IndexArray = NDArray[np.intp]  # what np.nonzero, argsort and searchsorted give
