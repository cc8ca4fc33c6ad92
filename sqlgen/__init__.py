"""sqlgen: growth-accounting views generated from a short YAML spec, for your own warehouse."""

__version__ = "0.1.0"

from .compiler import compile_spec, render_files  # noqa: E402
from .errors import OutputError, SpecError, SqlgenError, UnsupportedError  # noqa: E402
from .spec import Spec, load_spec, parse_spec  # noqa: E402

__all__ = [
    "__version__",
    "OutputError",
    "Spec",
    "SpecError",
    "SqlgenError",
    "UnsupportedError",
    "compile_spec",
    "load_spec",
    "parse_spec",
    "render_files",
]
