"""selector: a part-selection engine over an op-amp parameter table.

Notebook use::

    from selector import load_library, load_brief, derive, shortlist
    lib = load_library("data/demo_library.csv")
    result = shortlist(derive(load_brief("demo/briefs/vibration.toml")), lib)
    result.qualifying          # pandas DataFrame, ranked
    result.evaluation.frame()  # every check on every part
"""
__version__ = "0.1.0"

from .brief import Brief, load_brief, parse_brief  # noqa: E402
from .errors import InputError  # noqa: E402
from .library import Library, load_library, parse_library  # noqa: E402
from .ranking import Evaluation, Shortlist, evaluate, rank, shortlist  # noqa: E402
from .requirements import Requirements, derive  # noqa: E402

__all__ = ["Brief", "Evaluation", "InputError", "Library", "Requirements", "Shortlist",
           "derive", "evaluate", "load_brief", "load_library", "parse_brief",
           "parse_library", "rank", "shortlist"]
