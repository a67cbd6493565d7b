"""kicktrain from Python: design laser pulse trains that align and orient gas-phase molecules.

The same library as the ``kicktrain`` command (a native extension built from the Rust crate), with
inputs as dicts or JSON files and results as numpy arrays and plain dicts::

    import kicktrain as kt
    sim = kt.simulate({"molecule": "N2", "temperature_k": 300,
                       "pulses": [{"center_ps": 0, "fwhm_fs": 50, "peak_intensity_wcm2": 5e13}],
                       "window": {"start_ps": 0.2, "stop_ps": 12, "step_fs": 20}})
    sim.t_ps, sim["cos2"], sim.summary["peak_cos2"]

Units follow the file formats: times in ps (``_ps``) or fs (``_fs``), intensities in W/cm², static
fields in kV/cm, energies in mJ, temperatures in K. A bad input raises ``ValueError`` with the message
the command line prints (``pulses[0].fwhm_fs: expected …``).

Laser safety: lasers that align molecules are class 4. Every summary that states intensities,
energies or fields carries the caution under ``"laser_safety"``; follow your local laser safety officer
and the applicable standards (IEC 60825-1, ANSI Z136.1).
"""

import json
import math
import os
import sys
import warnings

import numpy as np

from . import _native

__all__ = ["simulate", "design", "pendular", "focus", "molecules", "Trace", "Simulation", "Design", "text_progress", "LASER_SAFETY"]

#: The laser-safety caution every output that states intensities, energies or fields carries.
LASER_SAFETY = _native.LASER_SAFETY
__version__ = _native.VERSION


def _source(value, what):
    """The native call's input: JSON text of a dict, or the path of a JSON file."""
    if isinstance(value, dict):
        try:
            return {"text": json.dumps(value, allow_nan=False)}
        except ValueError:
            raise ValueError(f"{what}: expected finite numbers (NaN and infinity are not JSON)") from None
        except TypeError as e:
            raise ValueError(f"{what}: expected JSON values (numbers, strings, lists, dicts): {e}") from None
    if isinstance(value, (str, os.PathLike)):
        return {"path": os.fspath(value)}
    raise TypeError(f"{what}: expected a dict or the path of a JSON file, got {type(value).__name__}")


class Trace:
    """Time series of one run: ``trace.t_ps`` and ``trace["cos2"]`` (numpy arrays, float64), in the
    columns and order of the ``trace.csv`` the command line writes."""

    def __init__(self, columns_json):
        pairs = json.loads(columns_json)
        self._columns = {name: np.asarray(values, dtype=np.float64) for name, values in pairs}
        for v in self._columns.values():
            v.setflags(write=False)

    @property
    def t_ps(self):
        """Sample times, ps."""
        return self._columns["t_ps"]

    @property
    def names(self):
        """Column names, as in trace.csv."""
        return list(self._columns)

    def __getitem__(self, name):
        try:
            return self._columns[name]
        except KeyError:
            raise KeyError(f"{name!r}: this trace has {', '.join(self._columns)}") from None

    def __contains__(self, name):
        return name in self._columns

    def __iter__(self):
        return iter(self._columns)

    def __len__(self):
        return len(self._columns)

    def as_dict(self):
        """The columns as a dict of numpy arrays."""
        return dict(self._columns)

    def __repr__(self):
        return f"Trace({len(self.t_ps)} samples: {', '.join(self._columns)})"


class Simulation:
    """A finished simulation: its trace (``sim.t_ps``, ``sim["cos2"]``, ``sim.trace``) and summary."""

    def __init__(self, native):
        self._native = native
        self.trace = Trace(native.columns_json())
        #: summary.json of the run (peaks, ensemble, pulses with kick strengths, laser-safety caution).
        self.summary = json.loads(native.summary_json())

    @property
    def t_ps(self):
        """Sample times, ps."""
        return self.trace.t_ps

    def __getitem__(self, name):
        return self.trace[name]

    def write(self, folder):
        """Write summary.json, trace.csv and alignment.svg into ``folder`` (new or empty), whole or not
        at all, as ``kicktrain simulate --out`` does."""
        self._native.write(os.fspath(folder))

    def __repr__(self):
        return f"Simulation({self.summary.get('molecule')}, {len(self.t_ps)} samples)"


class Design:
    """A finished design: ``best.scenario`` (the best train as a scenario dict, replayable with
    :func:`simulate`), ``best.score`` (full-solver goal value), ``best.trace`` (its replay, with the
    single-pulse baseline as ``baseline_*`` columns), ``best.summary`` (summary.json)."""

    def __init__(self, native):
        self._native = native
        self.scenario = json.loads(native.scenario_json())
        self.summary = json.loads(native.summary_json())
        self.trace = Trace(native.columns_json())
        #: True when the search was interrupted: the best design found so far, not a converged one.
        self.interrupted = native.interrupted

    @property
    def score(self):
        """The goal value of the best train with the full solver."""
        return self.summary["score"]

    @property
    def t_ps(self):
        """Sample times of the replayed trace, ps."""
        return self.trace.t_ps

    def write(self, folder):
        """Write design.json, summary.json, trace.csv, design.svg, history.csv and convergence.svg into
        ``folder`` (new or empty), whole or not at all, as ``kicktrain design --out`` does."""
        self._native.write(os.fspath(folder))

    def __repr__(self):
        flag = ", interrupted" if self.interrupted else ""
        return f"Design(score {self.score:.5f}, {len(self.scenario.get('pulses', []))} pulse(s){flag})"


def simulate(scenario, *, allow_long=False):
    """Run a scenario (a dict, or the path of a scenario JSON file) as ``kicktrain simulate`` does.

    ``allow_long`` lifts the step and state limits (``--allow-long``). Releases the GIL; runs on all
    cores. Returns a :class:`Simulation`.
    """
    return Simulation(_native.simulate(**_source(scenario, "scenario"), allow_long=allow_long))


def text_progress(stream=None):
    """A progress callback that writes one updating line (stage, evaluations done of planned, best so
    far) to ``stream`` (default ``sys.stderr``)."""
    out = stream if stream is not None else sys.stderr

    def show(stage, done, planned, best):
        width = 24
        filled = min(width, int(width * done / planned)) if planned else 0
        best_text = "" if best is None or not math.isfinite(best) else f" best {best:.5f}"
        out.write(f"\r{stage[:44]:<44} |{'#' * filled}{'.' * (width - filled)}| {done}/{planned}{best_text}   ")
        out.flush()

    return show


def design(objective, *, seed=None, effort=None, time_limit_s=None, progress=None):
    """Search the best pulse train for an objective (a dict, or the path of an objective JSON file) as
    ``kicktrain design`` does; returns a :class:`Design`.

    ``seed``, ``effort`` ("quick", "normal", "thorough") and ``time_limit_s`` (seconds) override the
    objective's search settings. ``progress``: None (silent), True (a text line on stderr) or a callable
    ``progress(stage, done, planned, best)``. Releases the GIL and runs on all cores. Ctrl-C (or a
    notebook's interrupt) ends the search at its next iteration and returns the best design so far with
    ``interrupted`` set (and a warning); before any start has finished it raises ``KeyboardInterrupt``.
    """
    callback = text_progress() if progress is True else (progress or None)
    if callback is not None and not callable(callback):
        raise TypeError("progress: expected None, True or a callable progress(stage, done, planned, best)")
    native = _native.design(**_source(objective, "objective"), seed=seed, effort=effort, time_limit_s=time_limit_s, progress=callback)
    if progress is True:
        sys.stderr.write("\n")
    result = Design(native)
    if result.interrupted:
        warnings.warn("kicktrain.design was interrupted: this is the best design found so far, not a converged one", RuntimeWarning, stacklevel=2)
    return result


def pendular(molecule, *, intensity_wcm2=0.0, static_kv_cm=0.0, temperature_k=1.0, static_angle_deg=0.0, j_max=3):
    """Field-dressed (pendular) states of a library molecule in a constant laser intensity (W/cm²) and
    static field (kV/cm, at ``static_angle_deg`` from the laser polarization): the adiabatic limit, as
    ``kicktrain pendular --json`` gives it (a dict, with the thermal averages at ``temperature_k``)."""
    return json.loads(_native.pendular(molecule, intensity_wcm2, static_kv_cm, temperature_k, static_angle_deg, j_max))


def focus(*, energy_mj, fwhm_fs, shape="gaussian", waist_um=None, beam_radius_mm=None, wavelength_nm=None, focal_length_mm=None, m2=1.0, molecule=None):
    """Peak intensity (W/cm²) and fluence at a focus from the pulse energy (mJ), duration (FWHM, fs) and
    either the waist (µm) or the beam radius (mm), wavelength (nm) and focal length (mm), as
    ``kicktrain focus --json`` gives them (a dict)."""
    return json.loads(_native.focus(energy_mj, fwhm_fs, shape, waist_um, beam_radius_mm, wavelength_nm, focal_length_mm, m2, molecule))


def molecules():
    """The built-in molecule library with constants and their sources (``kicktrain molecules --json``):
    ``{"linear": [...], "tops": [...]}``."""
    return json.loads(_native.molecules())
