"""The drawn public API: what `harbourwatch` exports, and that each name exists."""

from __future__ import annotations

import harbourwatch


def test_all_names_exist_and_are_unique():
    assert len(set(harbourwatch.__all__)) == len(harbourwatch.__all__)
    for name in harbourwatch.__all__:
        assert hasattr(harbourwatch, name), name


def test_public_list_is_the_drawn_one():
    # the exact set: a name added or dropped by accident fails here (update README's API list too)
    expected = {
        "__version__",
        "HarbourwatchError", "InputError", "ParameterError", "ComputationError", "OutputError",
        "load_inputs", "into_local_frame", "run_filter", "warm_up", "evaluate_rules",
        "run_review", "run_demo", "demo_paths", "score_files", "mean_gospa_files",
        "simulate", "simulate_to_dir",
        "SensorConfig", "ZoneConfig", "RuleConfig", "FilterSettings", "RunInputs",
        "LocalFrame", "LocalScene", "LocalZone", "FilterOutput", "Trajectory", "TrajectorySet",
        "AsSeenTable", "Alert", "RunSummary", "ScoreReport", "Scenario", "SimulationResult",
        "SCENARIOS", "CAUTION", "KNOT_M_S", "NAUTICAL_MILE_M",
    }
    assert set(harbourwatch.__all__) == expected


def test_every_library_error_is_a_harbourwatch_error():
    err = harbourwatch.ParameterError("must be at least 1", parameter="n_samples")
    assert isinstance(err, harbourwatch.HarbourwatchError) and isinstance(err, ValueError)
    assert err.parameter == "n_samples"
    assert issubclass(harbourwatch.ComputationError, harbourwatch.HarbourwatchError)


def test_input_error_is_a_value_error_and_names_location():
    err = harbourwatch.InputError("expected a number", file="a.csv", line=3, field="lat")
    assert isinstance(err, ValueError) and isinstance(err, harbourwatch.HarbourwatchError)
    assert str(err) == "a.csv, line 3, field 'lat': expected a number"


def test_bench_imports_only_public_names():
    import ast
    from pathlib import Path

    for path in sorted((Path(__file__).resolve().parent.parent / "bench").glob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom) and (node.module or "").startswith("harbourwatch"):
                private = [p for p in node.module.split(".") if p.startswith("_")]
                private += [a.name for a in node.names if a.name.startswith("_")]
                assert not private, f"{path.name}:{node.lineno} imports private {private}"
