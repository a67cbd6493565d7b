"""Type hints of the kicktrain Python module (units in the names: _ps, _fs, _wcm2, _kv_cm, _mj, _k)."""

import os
from typing import Any, Callable, Dict, Iterator, List, Optional, Union

import numpy as np
import numpy.typing as npt

Source = Union[Dict[str, Any], str, "os.PathLike[str]"]
ProgressCallback = Callable[[str, int, int, Optional[float]], Any]

LASER_SAFETY: str
__version__: str

class Trace:
    @property
    def t_ps(self) -> npt.NDArray[np.float64]: ...
    @property
    def names(self) -> List[str]: ...
    def __getitem__(self, name: str) -> npt.NDArray[np.float64]: ...
    def __contains__(self, name: object) -> bool: ...
    def __iter__(self) -> Iterator[str]: ...
    def __len__(self) -> int: ...
    def as_dict(self) -> Dict[str, npt.NDArray[np.float64]]: ...

class Simulation:
    trace: Trace
    summary: Dict[str, Any]
    @property
    def t_ps(self) -> npt.NDArray[np.float64]: ...
    def __getitem__(self, name: str) -> npt.NDArray[np.float64]: ...
    def write(self, folder: Union[str, "os.PathLike[str]"]) -> None: ...

class Design:
    scenario: Dict[str, Any]
    summary: Dict[str, Any]
    trace: Trace
    interrupted: bool
    @property
    def score(self) -> float: ...
    @property
    def t_ps(self) -> npt.NDArray[np.float64]: ...
    def write(self, folder: Union[str, "os.PathLike[str]"]) -> None: ...

def simulate(scenario: Source, *, allow_long: bool = ...) -> Simulation: ...
def text_progress(stream: Any = ...) -> ProgressCallback: ...
def design(
    objective: Source,
    *,
    seed: Optional[int] = ...,
    effort: Optional[str] = ...,
    time_limit_s: Optional[float] = ...,
    progress: Union[None, bool, ProgressCallback] = ...,
) -> Design: ...
def pendular(
    molecule: str,
    *,
    intensity_wcm2: float = ...,
    static_kv_cm: float = ...,
    temperature_k: float = ...,
    static_angle_deg: float = ...,
    j_max: int = ...,
) -> Dict[str, Any]: ...
def focus(
    *,
    energy_mj: float,
    fwhm_fs: float,
    shape: str = ...,
    waist_um: Optional[float] = ...,
    beam_radius_mm: Optional[float] = ...,
    wavelength_nm: Optional[float] = ...,
    focal_length_mm: Optional[float] = ...,
    m2: float = ...,
    molecule: Optional[str] = ...,
) -> Dict[str, Any]: ...
def molecules() -> Dict[str, List[Dict[str, Any]]]: ...
