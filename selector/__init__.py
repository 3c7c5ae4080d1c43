"""selector: a part-selection engine over an op-amp parameter table.

Notebook use::

    from selector import load_library, load_brief, derive, shortlist
    lib = load_library("data/demo_library.csv")
    result = shortlist(derive(load_brief("demo/briefs/vibration.toml")), lib)
    result.qualifying          # pandas DataFrame, ranked
    result.evaluation.frame()  # every check on every part

The names below are imported on first use (PEP 562), so ``import selector`` is
cheap and the command line's own error handling (Ctrl-C, bad input) is already in
place while pandas and numpy load.
"""
import importlib

__version__ = "0.1.0"

_API = {
    "Brief": "brief", "load_brief": "brief", "parse_brief": "brief",
    "InputError": "errors",
    "Library": "library", "load_library": "library", "parse_library": "library",
    "Evaluation": "ranking", "Shortlist": "ranking", "evaluate": "ranking",
    "rank": "ranking", "shortlist": "ranking",
    "Requirements": "requirements", "derive": "requirements",
}

__all__ = ["Brief", "Evaluation", "InputError", "Library", "Requirements", "Shortlist",
           "derive", "evaluate", "load_brief", "load_library", "parse_brief",
           "parse_library", "rank", "shortlist"]


def __getattr__(name: str):
    if name in _API:
        value = getattr(importlib.import_module(f".{_API[name]}", __name__), name)
        globals()[name] = value
        return value
    try:  # a submodule, as ``selector.units`` after ``import selector``
        return importlib.import_module(f".{name}", __name__)
    except ModuleNotFoundError as exc:
        if exc.name != f"{__name__}.{name}":
            raise
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}") from None


def __dir__():
    return sorted(set(globals()) | set(__all__))
