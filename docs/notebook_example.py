# %% [markdown]
# # thermorph from Python: a small study in notebook cells
#
# Runs the example forelimb case (`cases/limb_cooling.toml`, every value illustrative) in three cold
# surroundings with the compiled module `thermorph` (the command line's own drivers, in-process), overlays the
# three runs, draws the heat budget of each as bars, and fits the fur's conductivity to invented logger data
# (thermorph.fit). Open it in an editor that understands `# %%` cells (VS Code, Spyder, JupyterLab with jupytext)
# or run it as a script:
#
#     PYTHONPATH=build/python /usr/bin/python3 docs/notebook_example.py
#
# Model estimates for research only; not veterinary or medical advice. Follow local regulations, animal-welfare
# rules and licensed veterinary or medical practice.

# %%
import os
from pathlib import Path

import matplotlib

matplotlib.use(os.environ.get("MPLBACKEND", "Agg"))
import matplotlib.pyplot as plt
import numpy as np

import thermorph

here = Path(__file__).resolve().parent.parent
case = here / "cases" / "limb_cooling.toml"
out = Path(os.environ.get("THERMORPH_EXAMPLE_OUT", "notebook_example"))
out.mkdir(parents=True, exist_ok=True)

# %% The study: one case, three air temperatures (illustrative values), shortened to 1 h.
temperatures = [-15, -5, 5]  # degC
runs = {t: thermorph.run(str(case), set=[f"environment.temperature={t} degC", "run.duration=1 h"])
        for t in temperatures}
for t, r in runs.items():
    print(f"{t:>4} degC: forelimb mean skin {r['mean_skin_temperature'][-1]:.2f} degC after "
          f"{r['time'][-1] / 3600:g} h; energy balance error {r['budget']['energy_balance_error']:.2g} J")

# %% Overlay: mean skin temperature and the mean tissue temperature of the forelimb over time.
fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(9, 3.6), constrained_layout=True)
for t, r in runs.items():
    hours = r["time"] / 3600
    ax1.plot(hours, r["mean_skin_temperature"], label=f"air {t} degC")
    field = r["segments"]["forelimb"]["temperature"]            # [nt, nz, nr] degC
    ax2.plot(hours, field.reshape(field.shape[0], -1).mean(axis=1), label=f"air {t} degC")
ax1.set(xlabel="time [h]", ylabel="mean skin temperature [degC]", title="(a) skin")
ax2.set(xlabel="time [h]", ylabel="mean cell temperature [degC]", title="(b) forelimb cells (unweighted)")
ax1.legend(frameon=False)
fig.text(0.5, -0.02, thermorph.CAUTION, ha="center", va="top", fontsize=6, wrap=True)
fig.savefig(out / "overlay.png", dpi=150, bbox_inches="tight")

# %% Budget: heat exchanged by each channel over the run [kJ], one bar group per air temperature.
channels = [c for c in runs[temperatures[0]]["budget"]["channels"]
            if any(abs(r["cumulative_heat"][c][-1]) > 1e-9 for r in runs.values())]
fig, ax = plt.subplots(figsize=(6, 3.6), constrained_layout=True)
width = 0.8 / len(runs)
for i, (t, r) in enumerate(runs.items()):
    kj = [r["cumulative_heat"][c][-1] / 1e3 for c in channels]
    ax.bar(np.arange(len(channels)) + (i - (len(runs) - 1) / 2) * width, kj, width, label=f"air {t} degC")
ax.axhline(0, color="0.3", lw=0.8)
ax.set_xticks(np.arange(len(channels)), channels)
ax.set(ylabel="heat over 1 h [kJ] (+ into the limb)", title="heat budget by channel")
ax.legend(frameon=False)
fig.text(0.5, -0.02, thermorph.CAUTION, ha="center", va="top", fontsize=6, wrap=True)
fig.savefig(out / "budget.png", dpi=150, bbox_inches="tight")

# %% Fitting from Python. Invented logger data (illustrative: generated here from the model itself with the fur's
# conductivity at 0.05 W/(m K), mean skin temperature every 5 min plus noise of SD 0.1 K), held as a logger's
# download would be: a pandas DataFrame with a date-time index and columns named as in a `thermorph fit` CSV.
# thermorph.fit runs the command line's fit in-process and finds the conductivity back with its standard error.
import pandas as pd  # noqa: E402

setup = ["environment.temperature=-5 degC", "run.duration=1 h"]
truth = thermorph.run(str(case), set=setup + ["tissues.fur.conductivity=0.05 W/(m K)"])
every5 = slice(0, None, 5)
skin = truth["mean_skin_temperature"][every5]
start = pd.Timestamp("2026-01-15T14:00")
logger = pd.DataFrame({"body.mean_skin_temperature [degC]": skin + np.random.default_rng(1).normal(0, 0.1, skin.size),
                       "body.mean_skin_temperature.sd [K]": 0.1},
                      index=start + pd.to_timedelta(truth["time"][every5], unit="s"))
fit = thermorph.fit(str(case), logger, free="tissues.fur.conductivity=0.02 W/(m K):0.2 W/(m K):log",
                    start="tissues.fur.conductivity=0.08 W/(m K)", set=setup, data_start=start)
print(fit["report"])  # the command line's report: value, SE, 95 % interval, RMSE, s^2, AIC/BIC, warnings, caution
key = "tissues.fur.conductivity"
s = fit["series"]["body.mean_skin_temperature"]
fig, (ax1, ax2) = plt.subplots(2, 1, figsize=(6, 4.4), sharex=True, height_ratios=[3, 1], constrained_layout=True)
ax1.plot(s["model_time"] / 60, s["model"], label="fitted model")
ax1.errorbar(s["time"] / 60, s["observed"], yerr=s["sd"], fmt="o", ms=3, label="invented logger data")
ax1.set(ylabel="mean skin temperature [degC]",
        title=f"fur conductivity {fit['values'][key]:.4f} W/(m K), 95 % {fit['lower_95'][key]:.4f}"
              f"..{fit['upper_95'][key]:.4f}")
ax1.legend(frameon=False)
ax2.axhline(0, color="0.3", lw=0.8)
ax2.plot(s["time"] / 60, s["residual"], "o", ms=3)
ax2.set(xlabel="time [min]", ylabel="model - observed [K]")
fig.text(0.5, -0.02, thermorph.CAUTION, ha="center", va="top", fontsize=6, wrap=True)
fig.savefig(out / "fit.png", dpi=150, bbox_inches="tight")
print(f"figures in {out}/")
