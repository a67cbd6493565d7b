"""Plot the alignment trace of nitrogen after one 50 fs pulse, from Python.

Run after installing the module (see README, "From Python"):

    python examples/python_trace.py trace.png

Lasers that align molecules are class 4: follow your local laser safety officer and the applicable
standards (IEC 60825-1, ANSI Z136.1).
"""

import sys

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt

import kicktrain as kt

scenario = {
    "molecule": "N2",
    "temperature_k": 300,
    "pulses": [{"center_ps": 0, "fwhm_fs": 50, "peak_intensity_wcm2": 5e13}],
    "window": {"start_ps": 0.2, "stop_ps": 12, "step_fs": 20},
}
sim = kt.simulate(scenario)
peak = sim.summary["peak_cos2"]
print(f"N2 at 300 K, one 50 fs pulse at 5e13 W/cm²: peak ⟨cos²θ⟩ {peak['value']:.4f} at {peak['t_ps']:.3f} ps")
print(sim.summary["laser_safety"])

fig, ax = plt.subplots(figsize=(7, 3.2), dpi=120)
ax.plot(sim.t_ps, sim["cos2"], color="#1b6f8a", lw=1.2, label="⟨cos²θ⟩")
ax.axhline(1 / 3, color="0.55", lw=0.8, ls=(0, (4, 3)), label="isotropic 1/3")
ax.set_xlabel("time after the pulse (ps)")
ax.set_ylabel("⟨cos²θ⟩")
ax.set_title("N2, 300 K, 50 fs at 5e13 W/cm² (kicktrain from Python)", fontsize=10)
ax.legend(frameon=False, fontsize=8, loc="upper right")
fig.tight_layout()
out = sys.argv[1] if len(sys.argv) > 1 else "trace.png"
fig.savefig(out)
print(f"wrote {out}")
