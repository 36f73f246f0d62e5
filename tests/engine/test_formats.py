"""The number-format records against IEEE 754-2019's parameters, numpy's `finfo`, and the configuration."""
from __future__ import annotations

import math

import numpy as np
import pytest

from condhint.config import Config, apply_settings
from condhint.expr import INPUT, Node
from condhint.numeric.formats import BFLOAT16, BINARY16, BINARY32, BINARY64, FORMATS, UnknownFormat, format_named
from condhint.site import Site

# IEEE 754-2019, table 3.5 (binary interchange formats), from memory: u = 2**-p, largest finite, smallest normal,
# smallest subnormal. bfloat16: binary32's exponent range with p = 8 (as used by ml_dtypes / TPU documentation).
IEEE = {
    "binary64": (2.0**-53, 1.7976931348623157e308, 2.0**-1022, 2.0**-1074),
    "binary32": (2.0**-24, 3.4028234663852886e38, 2.0**-126, 2.0**-149),
    "binary16": (2.0**-11, 65504.0, 2.0**-14, 2.0**-24),
    "bfloat16": (2.0**-8, 3.3895313892515355e38, 2.0**-126, 2.0**-133),
}


@pytest.mark.parametrize("name", sorted(IEEE))
def test_limits_are_ieee_754s(name: str) -> None:
    fmt = FORMATS[name]
    u, largest, normal, subnormal = IEEE[name]
    assert (fmt.unit_roundoff, fmt.largest, fmt.smallest_normal, fmt.smallest_subnormal) == (
        u, largest, normal, subnormal)
    assert fmt.digits == pytest.approx(-math.log10(u), rel=1e-15)


def test_binary64_digits_are_the_familiar_fifteen_point_nine_five() -> None:
    # u = 2**-53 ≈ 1.11e-16, about 15.95 decimal digits (references.md: IEEE 754-2019)
    assert round(BINARY64.digits, 2) == 15.95


@pytest.mark.parametrize("fmt", [BINARY64, BINARY32, BINARY16], ids=lambda f: f.name)
def test_limits_agree_with_numpy_finfo(fmt) -> None:
    # numpy's finfo: eps is the spacing at 1 (2u), tiny the smallest normal, max the largest finite
    info = np.finfo(np.dtype(fmt.numpy_dtype))
    assert float(info.eps) == 2 * fmt.unit_roundoff
    assert float(info.max) == fmt.largest
    assert float(info.smallest_normal) == fmt.smallest_normal
    assert float(info.smallest_subnormal) == fmt.smallest_subnormal
    assert info.nmant + 1 == fmt.precision


def test_bfloat16_has_no_numpy_dtype_and_takes_ml_dtypes_one() -> None:
    import ml_dtypes

    assert BFLOAT16.numpy_dtype is None and BFLOAT16.external_dtype == "ml_dtypes.bfloat16"
    assert BFLOAT16.dtype == np.dtype(ml_dtypes.bfloat16)
    info = ml_dtypes.finfo(ml_dtypes.bfloat16)  # ml_dtypes' own limits of its bfloat16
    assert (float(info.max), float(info.smallest_normal), float(info.eps)) == \
        (BFLOAT16.largest, BFLOAT16.smallest_normal, 2 * BFLOAT16.unit_roundoff)


@pytest.mark.parametrize("name, fmt", [("float64", BINARY64), ("binary64", BINARY64), ("double", BINARY64),
                                       ("Float32", BINARY32), ("single", BINARY32), ("half", BINARY16),
                                       ("float16", BINARY16), ("bfloat16", BFLOAT16)])
def test_lookup_by_name_and_alias(name: str, fmt) -> None:
    assert format_named(name) is fmt


def test_unknown_name_lists_the_known_ones() -> None:
    with pytest.raises(UnknownFormat, match="binary32 \\(float32"):
        format_named("float128")


def test_sites_and_nodes_compute_in_binary64_by_default_and_keys_stay_as_before() -> None:
    x = Node(INPUT, name="x")
    y = Node("sqrt", (x,))
    assert y.format is BINARY64 and "@" not in y.key()
    assert y.key() == "i:x:0;sqrt:(0)"  # the binary64 key format caches were built with
    z = Node("sqrt", (x,), format=BINARY32)
    assert z.key() != y.key() and z.key().endswith("@binary32")
    site = Site(y, "f", None, 1)  # type: ignore[arg-type]
    assert site.float_format is BINARY64


def test_config_reads_unit_roundoff_from_the_format_record() -> None:
    assert Config().format is BINARY64
    assert Config().unit_roundoff == 2.0**-53  # IEEE 754-2019


@pytest.mark.parametrize("value, fmt", [("float32", BINARY32), ("float16", BINARY16), ("bfloat16", BFLOAT16),
                                        ("binary32", BINARY32)])
def test_config_names_the_format_of_values_the_code_does_not_type(value: str, fmt) -> None:
    cfg, errors = apply_settings(Config(), {"float_format": value})
    assert errors == [] and cfg.format is fmt


def test_config_accepts_any_format_name_and_rejects_unknown_names() -> None:
    for value in ("float64", "binary64", "double"):
        assert apply_settings(Config(), {"float_format": value})[1] == []
    cfg, errors = apply_settings(Config(), {"floatFormat": "decimal64"})
    assert len(errors) == 1 and "unknown number format 'decimal64'" in errors[0] and cfg.float_format == "float64"
