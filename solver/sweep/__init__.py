"""Parameter sweeps: one scenario, values set at dotted paths into its document, every case run on Dask.

A design question is a curve (thrust coefficient against ambient pressure, start-up pressure ratio against area
ratio), so a sweep states the ranges once and gets one table and one report back:

    vary = parse_vary("conditions.ambient.p_pa=101325:1000:6")     # START:STOP:COUNT, evenly spaced
    plan = build_plan(load_builtin("nozzle_sea_level"), [vary], nx=160, until_s=2e-3)
    result = run_sweep(plan, "sweep_results", workers=2)

One job per module:
  plan.py    --vary specs, the validated cases, saved sweep files (nothing runs)
  run.py     the cases on Dask's distributed scheduler, taken as they complete; case folders; resume
  tables.py  one row per case; sweep.csv and sweep.json
  report.py  sweep_report.html from the package's Jinja2 template, with the ideal curves of solver.nozzle

Outputs in the sweep folder: sweep.csv (one row per case: case number, varied values, summary figures with units
in the column names, status, error, folder), sweep.json (the plan and the same rows), sweep_report.html and a
folder per case.
"""
from .plan import (
    CASE_PREFIX,
    MAX_CASES,
    MAX_COUNT,
    SWEEP_DIR,
    Case,
    SweepError,
    SweepFile,
    SweepPlan,
    Vary,
    allowed_values,
    build_plan,
    builtin_sweep_names,
    canonical_json,
    case_key,
    is_sweep_file,
    load_sweep_file,
    parse_vary,
    resolve_scenario_ref,
    split_path,
)
from .report import CONSTANT_RTOL, IDEAL_CURVE_PATHS, ideal_nozzle_figures, write_sweep_report
from .run import (
    WORKER_WAIT_S,
    ProgressPrinter,
    SweepProgress,
    check_scheduler_address,
    kept_environ,
    local_cluster,
    print_progress,
    progress_line,
    run_case,
    run_sweep,
    worker_environment,
)
from .tables import (
    DONE_STATUSES,
    FAILED,
    LEAD_COLUMNS,
    NOT_RUN,
    RUN_FIGURES,
    TAIL_COLUMNS,
    SweepResult,
    case_row,
    columns_of,
    summary_row,
    write_tables,
)
