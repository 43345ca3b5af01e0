"""The public front: design.md's names, exactly, each documented with an example."""

import inspect

import marchland

DESIGN_NAMES = {
    "read_units",
    "zonal_population",
    "read_reports",
    "analysis_units",
    "border_graph",
    "attack_rates",
    "case_fatality",
    "smooth_rates",
    "local_moran",
    "hotspots",
    "first_cases",
    "spread_fronts",
    "spread_velocity",
    "cross_border_introductions",
    "corridor",
    "border_risk",
    "backtest_risk",
    "prioritise",
    "choose_depots",
    "open_region",
    "run_month",
    "run_week",
    "nowcast",
    "forecast",
    "backtest_forecast",
    "emerging_clusters",
}


def test_all_is_exactly_the_design_api():
    assert set(marchland.__all__) == DESIGN_NAMES
    assert len(marchland.__all__) == len(DESIGN_NAMES)
    assert set(marchland._EXPORTS) == DESIGN_NAMES


def test_every_public_name_resolves_with_hints_and_an_example():
    for name in marchland.__all__:
        obj = getattr(marchland, name)
        assert callable(obj), name
        doc = inspect.getdoc(obj) or ""
        assert "Examples" in doc, f"{name} has no Examples section"
        assert "Parameters" in doc, f"{name} has no Parameters section"
        hints = inspect.get_annotations(obj)
        assert "return" in hints, f"{name} has no return type hint"


def test_unknown_name_is_an_attribute_error():
    try:
        marchland.no_such_function  # noqa: B018
    except AttributeError as err:
        assert "no_such_function" in str(err)
    else:
        raise AssertionError("expected AttributeError")


def _all_modules() -> list[str]:
    import pkgutil

    return [m.name for m in pkgutil.walk_packages(marchland.__path__, "marchland.")]


def test_no_public_name_shares_its_name_with_a_module():
    # design.md: no public function shares its name with a module, so the package front needs
    # no tricks: importing every module leaves each public name the function it was.
    leaves = {name.rsplit(".", 1)[1] for name in _all_modules()}
    assert not leaves & set(marchland.__all__)


def test_public_names_stay_functions_after_every_module_is_imported():
    import importlib

    for name in _all_modules():
        if ".demo" in name and name.endswith("__main__"):
            continue
        importlib.import_module(name)
    for name in marchland.__all__:
        assert callable(getattr(marchland, name)), name
    assert marchland.hotspots is importlib.import_module("marchland.stats").hotspots
