# %% [markdown]
# # Exploring a supply from Python
#
# A notebook kept as a script: each `# %%` starts a cell (Jupyter with jupytext, VS Code and
# most editors run them one by one), and `python docs/explore.py` runs it all.  The test suite
# runs it too (tests/test_api.py), so every line here works with this version of simkit.
#
# The design is one of the examples shipped with simkit, invented for demonstration.
#
# **High voltage can kill.**  These figures are a simulation, not a guarantee that a built supply
# is safe: discharge every capacitor before touching, keep one hand in your pocket, and follow
# your local electrical codes.

# %%
import math

import simkit

design = simkit.load(simkit.example("bench_amp_bridge_clc"))
print(design)
print("reservoir:", design.filters[0].c, "F;  load:", design.loads[0].r, "ohm")

# %% [markdown]
# ## Run it
#
# `result.figures` holds the same numbers as `simkit run --json` (its `metrics`), in SI units.
# In a notebook, `result` on its own shows a table of them and the waveforms.

# %%
result = simkit.run(design)
for name in ("vout_dc_v", "ripple_pp_v", "iout_dc_a", "diode_peak_a", "diode_piv_v", "surge_peak_a"):
    print(f"{name:>14} = {result.figures[name]:.5g}")
print("D1 peak reverse voltage:", round(result.parts["D1"].piv_v, 1), "V")
print("warnings:", result.warnings or "none")

# %% [markdown]
# ## Waveforms at any node or part
#
# A node by its name in the deck (`simkit netlist DESIGN --nodes` lists them), a part's current by
# the part's name, the voltage across a part as `v(NAME)`.  The steady-state waveform covers the
# window the figures are measured over, so its mean is `vout_dc_v`.

# %%
time, out = result.waveform("out")
mean = float(((out[1:] + out[:-1]) / 2 * (time[1:] - time[:-1])).sum() / (time[-1] - time[0]))
print(f"mean of v(out) over the last period: {mean:.6f} V (vout_dc_v {result.figures['vout_dc_v']:.6f} V)")
assert math.isclose(mean, result.figures["vout_dc_v"], rel_tol=1e-12)

d1 = result.waveform("D1")
print(f"i(D1): {d1.meaning}; peak {d1.value.max():.4g} {d1.unit}")
start = result.waveform("out", run="switch-on")
print(f"after switch-on the output peaks at {start.value.max():.4g} V, {start.time[start.value.argmax()] * 1e3:.1f} ms in")

# %%
import matplotlib  # noqa: E402  (a notebook imports where it needs)

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

fig, (top, bottom) = plt.subplots(2, 1, figsize=(7, 5), layout="constrained")
top.plot(time * 1e3, out)
top.set(title="output in steady state", xlabel="time (ms)", ylabel="v(out) (V)")
bottom.plot(start.time * 1e3, start.value)
bottom.set(title="output from switch-on", xlabel="time (ms)", ylabel="v(out) (V)")
fig.savefig("explore-output.png")
print("wrote explore-output.png")

# %% [markdown]
# ## Check the ratings, sweep a value, compare two variants

# %%
verdicts = simkit.check(design)
print("check:", verdicts.result, verdicts.counts)
for row in verdicts:
    if row["verdict"] != "pass":
        print("  ", row["part"], row["rule"], row["verdict"])

# %%
sweep = simkit.sweep(design, vary={"filter.0.c": ["22u", "47u", "100u"]})
for row in sweep.rows:
    print(f"C1 = {row['filter.0.c'] * 1e6:5.0f} uF: ripple {row['ripple_pp_v'] * 1e3:6.2f} mV, "
          f"output {row['vout_dc_v']:.1f} V")
sweep.to_csv("explore-sweep.csv", force=True)
print("wrote explore-sweep.csv")
try:
    print(sweep.to_dataframe()[["filter.0.c", "ripple_pp_v"]])
except ImportError as exc:  # pandas is optional
    print(exc)

# %%
side = simkit.compare(design, design.with_set({"filter.0.c": "100u"}), check=False)
print("designs:", [e.label for e in side.entries])
print("ripple change from [1] to [2]:", f"{side.differences()['ripple_pp_v'][1] * 1e3:+.2f} mV")
