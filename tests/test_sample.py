"""Tests for meanband.stats.sample: validation of trials and the stable mean and sd."""

from __future__ import annotations

import math
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meanband import TrialError
from meanband.stats.sample import (
    as_sample,
    check_confidence,
    deviations,
    location_scale,
    sum_of_products,
)
from reference_data import STRD_NAMES, STRD_RTOL, load_strd_dat, load_values, strd_certified


class TestAsSample:
    def test_list_becomes_flat_float64(self) -> None:
        x = as_sample([1, 2, 3])
        assert x.dtype == np.float64
        assert x.shape == (3,)
        assert x.tolist() == [1.0, 2.0, 3.0]

    def test_generator_and_tuple_are_accepted(self) -> None:
        assert as_sample(v for v in (1.5, 2.5)).tolist() == [1.5, 2.5]
        assert as_sample((4, 5)).tolist() == [4.0, 5.0]

    def test_nan_and_inf_positions_are_named(self) -> None:
        with pytest.raises(TrialError, match=r"2 of 5 trials .*positions 1, 3\)"):
            as_sample([1.0, math.nan, 2.0, math.inf, 3.0])

    def test_negative_infinity_is_refused(self) -> None:
        with pytest.raises(TrialError, match=r"positions 0\)"):
            as_sample([-math.inf, 1.0, 2.0])

    def test_many_bad_positions_are_summarised(self) -> None:
        values = np.full(20, math.nan)
        with pytest.raises(TrialError, match=r"20 of 20 .*0, 1, 2, 3, 4, 5, 6, 7 and 12 more"):
            as_sample(values)

    @pytest.mark.parametrize("values", [[], [1.0], 3.0])
    def test_fewer_than_two_values(self, values: object) -> None:
        with pytest.raises(TrialError, match="at least 2 trials"):
            as_sample(values)  # type: ignore[arg-type]

    def test_minimum_is_respected(self) -> None:
        assert as_sample([7.0], minimum=1).tolist() == [7.0]
        with pytest.raises(TrialError, match="at least 4 trials, got 3"):
            as_sample([1, 2, 3], minimum=4)

    def test_two_dimensional_input_is_refused(self) -> None:
        with pytest.raises(TrialError, match=r"flat sequence .*shape \(2, 2\)"):
            as_sample([[1.0, 2.0], [3.0, 4.0]])

    @pytest.mark.parametrize("values", [["fast", "slow"], [object(), object()], [1.0, [2.0, 3.0]]])
    def test_non_numbers_are_refused(self, values: object) -> None:
        with pytest.raises(TrialError, match="must be numbers"):
            as_sample(values)  # type: ignore[arg-type]

    def test_trial_error_is_a_value_error(self) -> None:
        with pytest.raises(ValueError):
            as_sample([math.nan, 1.0])


class TestCheckConfidence:
    @pytest.mark.parametrize("level", [0.5, 0.9, 0.95, 0.999, 1e-9])
    def test_accepts_open_unit_interval(self, level: float) -> None:
        assert check_confidence(level) == level

    def test_accepts_numpy_scalars(self) -> None:
        assert check_confidence(np.float32(0.5)) == 0.5
        assert isinstance(check_confidence(np.float64(0.9)), float)

    @pytest.mark.parametrize("level", [0.0, 1.0, -0.1, 1.5, math.nan, math.inf, -math.inf])
    def test_refuses_outside_open_unit_interval(self, level: float) -> None:
        with pytest.raises(TrialError, match="strictly between 0 and 1"):
            check_confidence(level)

    def test_percent_gets_a_hint(self) -> None:
        with pytest.raises(TrialError, match=r"did you mean 0\.95\?"):
            check_confidence(95)

    @pytest.mark.parametrize("level", [None, "high", [0.9, 0.95]])
    def test_refuses_non_numbers(self, level: object) -> None:
        with pytest.raises(TrialError, match="confidence must be a number"):
            check_confidence(level)  # type: ignore[arg-type]


class TestLocationScaleAgainstStRD:
    """NIST StRD univariate summary statistics (tests/data/SOURCES.md, section 1)."""

    @pytest.mark.parametrize("name", STRD_NAMES)
    def test_text_file_holds_the_data_of_the_dat_file(self, name: str) -> None:
        # The .txt files are the data block of the published .dat files (SOURCES.md, "Files").
        x = load_values(name)
        np.testing.assert_array_equal(x, load_strd_dat(name))
        assert x.size == strd_certified(name).n

    @pytest.mark.parametrize("name", STRD_NAMES)
    def test_mean_and_sd_match_certified_values(self, name: str) -> None:
        # Certified values: NIST StRD univariate, <name>.dat lines 41-42; tolerances per
        # SOURCES.md section 1 "Notes for writing tests against these" (see STRD_RTOL).
        certified = strd_certified(name)
        rtol_mean, rtol_sd, _ = STRD_RTOL[name]
        mean, sd = location_scale(load_values(name))
        assert mean == pytest.approx(certified.mean, rel=rtol_mean, abs=0)
        assert sd == pytest.approx(certified.sd, rel=rtol_sd, abs=0)

    def test_numacc4_is_as_good_as_float64_allows(self) -> None:
        # SOURCES.md section 1: the exact s of NumAcc4's binary64-rounded inputs is
        # 0.10000000055879354, i.e. about 8 correct digits is the best a double can do.
        _, sd = location_scale(load_values("NumAcc4"))
        assert sd == pytest.approx(0.10000000055879354, rel=1e-12)

    @pytest.mark.parametrize("name", ["NumAcc3", "NumAcc4"])
    def test_the_tolerance_catches_a_naive_one_pass_variance(self, name: str) -> None:
        # SOURCES.md section 1: a one-pass sum-of-squares variance fails NumAcc3/NumAcc4 by
        # orders of magnitude; this shows the tolerance above is tight enough to notice.
        x = load_values(name)
        n = x.size
        naive = math.sqrt(max((float(np.sum(x * x)) - n * float(np.mean(x)) ** 2) / (n - 1), 0.0))
        _, sd = location_scale(x)
        rtol_sd = STRD_RTOL[name][1]
        assert abs(sd - 0.1) / 0.1 <= rtol_sd
        assert abs(naive - 0.1) / 0.1 > 1e3 * rtol_sd


class TestLocationScale:
    def test_two_values(self) -> None:
        assert location_scale(np.array([1.0, 3.0])) == (2.0, math.sqrt(2.0))

    def test_constant_values_have_zero_sd(self) -> None:
        assert location_scale(np.full(7, 0.1)) == (0.1, 0.0)

    def test_matches_numpy_without_an_offset(self) -> None:
        x = np.random.default_rng(20261201).normal(3.0, 2.0, 1000)
        mean, sd = location_scale(x)
        # numpy.mean / numpy.std(ddof=1): reference library.
        assert mean == pytest.approx(float(np.mean(x)), rel=1e-14)
        assert sd == pytest.approx(float(np.std(x, ddof=1)), rel=1e-13)

    @settings(max_examples=100, deadline=None)
    @given(
        st.lists(st.integers(-1000, 1000), min_size=2, max_size=60),
        st.sampled_from([1e3, 1e6, 1e9, -1e9]),
    )
    def test_stable_under_a_large_offset(self, counts: list[int], offset: float) -> None:
        # Integer steps of 1/8 are exact in binary, so x + offset is exact and the sd must not move.
        x = np.asarray(counts, dtype=np.float64) / 8.0
        mean, sd = location_scale(x)
        shifted_mean, shifted_sd = location_scale(x + offset)
        assert shifted_mean == pytest.approx(mean + offset, rel=1e-15, abs=1e-12)
        assert shifted_sd == pytest.approx(sd, rel=1e-9, abs=1e-12)


class TestDeviations:
    def test_deviations_are_centred_and_consistent(self) -> None:
        x = 1e7 + np.random.default_rng(21).normal(0.0, 0.1, 5000)
        mean, sd, dev = deviations(x)
        assert (mean, sd) == location_scale(x)
        assert abs(float(np.sum(dev))) < 1e-12 * x.size * sd
        # math.fsum: correctly rounded reference sum.
        assert math.sqrt(math.fsum(dev * dev) / (x.size - 1)) == pytest.approx(sd, rel=1e-14)

    def test_input_is_not_modified(self) -> None:
        x = np.array([3.0, 1.0, 2.0])
        deviations(x)
        assert x.tolist() == [3.0, 1.0, 2.0]


class TestSumOfProducts:
    @pytest.mark.parametrize("n", [1, 2, 7, 1000, 32768, 32769, 100_003])
    def test_matches_a_correctly_rounded_sum(self, n: int) -> None:
        rng = np.random.default_rng(n)
        a, b = rng.normal(size=n), rng.normal(size=n)
        # math.fsum of the exact products' doubles: the reference (Shewchuk 1997).
        expected = math.fsum((a * b).tolist())
        scale = math.fsum(np.abs(a * b).tolist())
        assert sum_of_products(a, b) == pytest.approx(expected, rel=0, abs=1e-15 * scale + 1e-300)

    def test_views_and_lags(self) -> None:
        x = np.arange(100_000, dtype=np.float64) % 7 - 3.0
        assert sum_of_products(x[:-1], x[1:]) == math.fsum((x[:-1] * x[1:]).tolist())

    def test_empty(self) -> None:
        assert sum_of_products(np.array([]), np.array([])) == 0.0


def _modules_loaded_after(code: str) -> list[str]:
    probe = (
        f"import sys; {code}; "
        "print(','.join(m for m in ('pytest', '_pytest', 'scipy', 'numpy') if m in sys.modules))"
    )
    result = subprocess.run(
        [sys.executable, "-c", probe], capture_output=True, text=True, check=True, timeout=60
    )
    return [m for m in result.stdout.strip().split(",") if m]


def test_importing_the_package_loads_neither_pytest_nor_scipy() -> None:
    # DESIGN.md architecture: scipy is imported lazily and the core never imports pytest.
    assert _modules_loaded_after("import meanband") == []


def test_using_the_core_does_not_load_pytest() -> None:
    loaded = _modules_loaded_after(
        "import meanband; meanband.mean_interval([1.0, 2.0, 4.0]); meanband.diagnose([3.0, 1.0, 2.0]); "
        "meanband.decide([1.0, 2.0, 4.0], meanband.make_band(high=9.0))"
    )
    assert "scipy" in loaded  # the statistics did run
    assert "pytest" not in loaded
    assert "_pytest" not in loaded
