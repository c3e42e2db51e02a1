"""The public API: every name documented, imported lazily, the old names gone."""

import inspect
import subprocess
import sys
import typing

import pytest

import tnsim

RESULT_TYPES = ["Scaled", "Plan", "ForecastReport", "XebResult", "ContractionRecord"]


@pytest.mark.parametrize("name", sorted(set(tnsim.__all__) - {"__version__"}))
def test_every_public_name_is_documented(name):
    value = getattr(tnsim, name)
    doc = inspect.getdoc(value) or ""
    least = 1 if isinstance(value, type) and issubclass(value, Exception) else 3
    assert len(doc.splitlines()) >= least, f"tnsim.{name} needs a docstring"
    assert name in dir(tnsim)


@pytest.mark.parametrize("name", RESULT_TYPES)
def test_result_types_are_exported_with_their_fields_documented(name):
    cls = getattr(tnsim, name)
    assert name in tnsim.__all__ and name in (tnsim.__doc__ or "")
    doc = inspect.getdoc(cls)
    assert "Attributes" in doc
    for field in getattr(cls, "__dataclass_fields__", {}):
        assert field in doc, f"{name}.{field} is not documented"


def test_import_is_lazy_and_version_comes_from_metadata():
    code = (
        "import sys, tnsim; print(any(m.startswith('tnsim.queries') for m in sys.modules)); "
        "print(tnsim.__version__)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    lazy, version = out.stdout.split()
    assert lazy == "False"
    assert version[0].isdigit()


def test_help_loads_no_heavy_module():
    # Start-up of the command line (issue 14: ``tnsim --help`` within 0.2 s) depends on
    # loading no numerical library; a top-level import of numpy in a module the parser
    # needs (tnsim.units did) brings back ~60 ms.
    code = (
        "import sys; from tnsim.cli import build_parser; build_parser().format_help(); "
        "print(sorted({m.split('.')[0] for m in sys.modules} & "
        "{'numpy', 'scipy', 'networkx', 'opt_einsum', 'tqdm'}))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_amplitude_return_type_follows_the_scaled_flag():
    from tnsim.queries.amplitudes import amplitude

    overloads = typing.get_overloads(amplitude) if hasattr(typing, "get_overloads") else []
    if overloads:  # Python 3.11+ records them
        returns = {str(inspect.signature(f).return_annotation) for f in overloads}
        assert {"complex", "Scaled"} <= returns
    c = tnsim.Circuit(1).h(0)
    assert type(tnsim.amplitude(c, "1")) is complex
    assert isinstance(tnsim.amplitude(c, "1", scaled=True), tnsim.Scaled)


def test_one_bitstring_parameter_name_for_one_and_many():
    one = inspect.signature(tnsim.amplitude).parameters
    many = inspect.signature(tnsim.amplitudes).parameters
    assert "bitstring" in one and "bitstrings" in many
    assert "bitstring" in inspect.signature(tnsim.forecast).parameters
    assert "bitstrings" in inspect.signature(tnsim.xeb).parameters
    assert "bitstrings" in inspect.signature(tnsim.iter_amplitudes).parameters


@pytest.mark.parametrize(
    "query",
    [
        *("amplitude", "amplitudes", "iter_amplitudes", "marginal", "expectation", "sample"),
        *("xeb", "maxcut_energy", "contract", "forecast"),
    ],
)
def test_every_query_takes_memory_limit_and_dtype(query):
    params = inspect.signature(getattr(tnsim, query)).parameters
    assert {"memory_limit", "dtype"} <= set(params)
    assert params["memory_limit"].default is None and params["dtype"].default is None


@pytest.mark.parametrize("old", ["TensorNetwork", "ContractionTree", "slice_and_replan", "execute"])
def test_old_public_names_are_gone(old):
    assert old not in tnsim.__all__
    with pytest.raises(AttributeError):
        getattr(tnsim, old)


def test_the_forecast_is_a_function_not_a_callable_module():
    import tnsim.plan

    assert not callable(tnsim.plan)
    assert inspect.isfunction(tnsim.forecast)
