"""The `shockslate` command: its sub-commands exist, refuse bad input with exit code 2, and do their job."""
from __future__ import annotations

import json
import subprocess
import sys

import pytest

from shockslate.server.cli import build_parser, main


def test_every_documented_command_is_there():
    sub = next(a for a in build_parser()._actions if a.dest == "command")
    assert {"serve", "bench", "run", "scenarios", "check", "sweep", "warm"} <= set(sub.choices)


def test_every_entry_point_shares_one_kernel_cache(tmp_path):
    # `make test` and `make run` call `shockslate warm` after installing; the server, the batch commands and
    # the tests must then read the same cache: the package sets numba's cache folder before numba is imported.
    env = {**__import__("os").environ, "SHOCKSLATE_CACHE_DIR": str(tmp_path / "cache")}
    env.pop("NUMBA_CACHE_DIR", None)
    code = "import shockslate.solver.kernels, numba; print(numba.config.CACHE_DIR)"
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300, env=env)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == str(tmp_path / "cache" / "numba")


def test_warm_says_where_the_kernels_go(capsys):
    from shockslate.solver import cache_dir

    assert main(["warm"]) == 0
    out = capsys.readouterr().out
    assert str(cache_dir()) in out and "kernels ready in" in out


def test_scenarios_lists_the_built_ins(capsys):
    assert main(["scenarios"]) == 0
    out = capsys.readouterr().out
    assert "nozzle_sea_level" in out and "forward_step_mach3" in out


def test_check_accepts_a_good_file_and_names_the_path_in_a_bad_one(tmp_path, capsys):
    from shockslate.solver.scenario import builtin_path

    assert main(["check", str(builtin_path("shock_tube_reflection"))]) == 0
    doc = json.loads(builtin_path("shock_tube_reflection").read_text())
    doc["conditions"]["ambient"]["p_pa"] = -5.0
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(doc))
    assert main(["check", str(bad)]) == 2
    captured = capsys.readouterr()
    assert "conditions.ambient.p_pa" in captured.out + captured.err


def test_serve_refuses_a_bad_port(capsys):
    assert main(["serve", "--port", "70000"]) == 2
    assert "--port = 70000" in capsys.readouterr().err


def test_console_script_runs_a_short_batch(tmp_path):
    # the installed entry point, in a fresh process, as a user would call it
    out = tmp_path / "out"
    cmd = [sys.executable, "-c", "import sys; from shockslate.server.cli import main; sys.exit(main(sys.argv[1:]))",
           "run", "shock_tube_reflection", "--steps", "5", "--resolution", "80", "--out", str(out)]
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    summary = json.loads((out / "summary.json").read_text())
    assert summary["steps"] == 5 and summary["resolution"]["nx"] == 80


def test_a_nozzle_run_of_a_few_steps_prints_its_figures_without_failing(tmp_path, capsys):
    # common practice, no source: three steps into a start-up there is no outflow yet, so some engine figures are
    # not available; the command says so instead of failing (as the installed-package check runs it)
    assert main(["run", "nozzle_sea_level", "--steps", "3", "--resolution", "80", "--out", str(tmp_path / "o")]) == 0
    line = next(s for s in capsys.readouterr().out.splitlines() if s.startswith("nozzle ("))
    assert "of choked" in line and "Isp " in line


@pytest.mark.parametrize("argv", [["run"], ["nonsense"]])
def test_usage_errors_exit_2(argv):
    with pytest.raises(SystemExit) as info:
        main(argv)
    assert info.value.code == 2


def test_a_misspelt_built_in_name_gets_a_suggestion(capsys, tmp_path):
    assert main(["run", "nozle_sea_level", "--steps", "1", "--out", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "did you mean 'nozzle_sea_level'?" in err and "Traceback" not in err
    assert main(["run", "completely_different", "--steps", "1", "--out", str(tmp_path)]) == 2
    assert "did you mean" not in capsys.readouterr().err


def test_a_misspelt_saved_or_built_in_name_from_the_page_gets_a_suggestion(tmp_path):
    from shockslate.server.errors import RequestError
    from shockslate.server.persistence import ScenarioStore

    with pytest.raises(RequestError) as info:
        ScenarioStore(tmp_path).load_named("shock_tube_reflektion")
    assert "did you mean 'shock_tube_reflection'?" in info.value.message


def test_check_says_which_defaults_a_file_relies_on(tmp_path, capsys):
    # issue 'the first hour': a file with a value left out is accepted, and check says the default was used
    from shockslate.solver.scenario import builtin_path

    doc = json.loads(builtin_path("shock_tube_reflection").read_text())
    del doc["numerics"]["cfl"]
    del doc["edges"]
    path = tmp_path / "short.json"
    path.write_text(json.dumps(doc))
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "defaults are used" in out and "numerics.cfl = 0.4" in out and "edges.left = " in out
    assert main(["check", str(builtin_path("shock_tube_reflection"))]) == 0
    assert "defaults are used" not in capsys.readouterr().out  # the built-ins say everything they mean
