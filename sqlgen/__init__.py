"""sqlgen: growth-accounting views generated from a short YAML spec, for your own warehouse."""

__version__ = "0.1.0"

# The names below are imported at their first use (PEP 562): `sqlgen build --check` of a
# folder its manifest vouches for needs neither the compiler nor sqlglot.
_EXPORTS = {
    "compile_spec": "compiler",
    "render_files": "compiler",
    "OutputError": "errors",
    "SpecError": "errors",
    "SqlgenError": "errors",
    "UnsupportedError": "errors",
    "Spec": "spec",
    "load_spec": "spec",
    "parse_spec": "spec",
}

__all__ = ["__version__", *sorted(_EXPORTS)]


def __getattr__(name: str):
    if name not in _EXPORTS:
        raise AttributeError(f"module 'sqlgen' has no attribute {name!r}")
    from importlib import import_module

    value = getattr(import_module(f".{_EXPORTS[name]}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_EXPORTS))
