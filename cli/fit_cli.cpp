#include "cli/fit_cli.hpp"


namespace thermorph {


CLI::App* addFitSubcommand(CLI::App& app, FitOptions& o) {
  CLI::App* fit = app.add_subcommand(
      "fit", "Fit case parameters to observed series (Ceres least squares): values, standard errors, 95 % intervals, "
             "correlations, RMSE, AIC/BIC; the fitted run's results with /fit, and a fitted case file");
  fit->add_option("case", o.casePath, "Case file (TOML)")->required();
  fit->add_option("--set", o.overrides, "Override a case key: KEY=VALUE")->take_all()->allow_extra_args(false);
  fit->add_option("--data", o.data,
                  "Observed-data CSV: time [UNIT] (or datetime), then columns NAME [UNIT] and optional NAME.sd [UNIT]")
      ->take_all()
      ->allow_extra_args(false);
  fit->add_option("--data-start", o.dataStart, "ISO 8601 date-time of t = 0, for datetime columns (2026-06-01T06:00)");
  fit->add_option("--free", o.free,
                  "A free parameter, addressed as --set addresses it, with bounds: KEY=LOWER:UPPER or "
                  "KEY=LOWER:UPPER:log, e.g. \"segments.trunk.coat.thickness=0.5 cm:3 cm\"")
      ->take_all()
      ->allow_extra_args(false);
  fit->add_option("--start", o.starts, "Start value KEY=VALUE (default: the case's value)")->take_all()->allow_extra_args(false);
  fit->add_option("--prior", o.priors, "Gaussian prior KEY=MEAN:SD (an extra residual (value - MEAN) / SD)")
      ->take_all()
      ->allow_extra_args(false);
  fit->add_option("--multi-start", o.multiStart, "Number of starts: the given one plus N - 1 Sobol' points in the bounds")
      ->check(CLI::Range(1, 1000));
  fit->add_option("--max-iterations", o.maxIterations, "Iterations of the least-squares solver (default 50)")
      ->check(CLI::Range(1, 10000));
  fit->add_option("--gradient", o.gradient,
                  "Jacobian: auto (CVODES forward sensitivities for parameters that enter the network as coefficients, "
                  "central differences for geometry and the rest) or fd (central differences for all); default auto")
      ->check(CLI::IsMember({"auto", "fd"}));
  fit->add_option("--step", o.step, "Finite-difference step, relative (or in ln for log-scale parameters); default 1e-4");
  fit->add_option("--rtol", o.rtol,
                  "Integrator tolerances of the fit's runs (run.rtol, run.atol in K); 0 keeps the case's. Default 1e-7 (model errors below 1e-3 of a 0.05 K noise SD on the example fit)");
  fit->add_option("--converged-se", o.stepTolerance,
                  "Converged when the Gauss-Newton step is below this many standard errors (relative offset "
                  "criterion, Bates & Watts 1981); default 0.01");
  fit->add_option("--grid-check", o.gridCheck,
                  "After the fit, run the fitted model once on the grid refined N x and estimate the grid's bias of "
                  "the fitted values from the fit's Jacobian (warning above 0.2 SE or 1 % of a value); 0: no check. "
                  "Default 2")
      ->check(CLI::Range(0, 16));
  fit->add_flag("--cold-start", o.coldStart,
                "Find the steady start of a refined run (the grid check's, or any with run.grid_refinement > 1) by "
                "the relaxation from the case's initial temperature instead of by Newton from the unrefined grid's "
                "steady state on its cells (the default; the same steady state to KINSOL's tolerance)");
  fit->add_option("-j,--jobs", o.jobs, "Threads for the runs of one Jacobian (default: all cores)");
  fit->add_option("-o,--output", o.output,
                  "Results of the fitted run with the /fit group (HDF5); the fitted case goes beside it as "
                  "NAME_fitted.toml. Default: CASE-NAME_fit.h5");
  fit->add_flag("-q,--quiet", o.quiet, "No progress on stderr");
  return fit;
}


}  // namespace thermorph
