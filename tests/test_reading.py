"""Bounded reads: regular files only, a size limit read through a bounded read, a depth limit."""

from __future__ import annotations

import json
import os
import sys
import threading

import pytest
from meanband import defaults
from meanband.store.reading import MAX_DEPTH, ReadError, check_depth, loads_json, parse_size, read_text


def test_a_regular_file_under_the_limit_is_read(tmp_path):
    path = tmp_path / "plan.toml"
    path.write_text("n = 12  # degC\n", encoding="utf-8")
    assert read_text(path, max_bytes=path.stat().st_size) == "n = 12  # degC\n"


def test_a_file_over_the_limit_is_refused_naming_it_and_the_setting(tmp_path):
    path = tmp_path / "big.json"
    path.write_bytes(b" " * 101)
    with pytest.raises(ReadError, match=r"big\.json is larger than the read limit of 100 bytes.*"
                       r"raise the limit with --max-bytes"):
        read_text(path, max_bytes=100)


def test_the_default_limit_is_256_mib():
    assert defaults.MAX_READ_BYTES == 256 * 1024 * 1024


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="needs Linux /proc")
def test_the_read_itself_is_bounded_when_the_size_lies():
    # /proc files are regular but report size 0: only a bounded read notices they are larger.
    with pytest.raises(ReadError, match="larger than the read limit of 10 bytes"):
        read_text("/proc/self/status", max_bytes=10)


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs FIFOs")
def test_a_fifo_is_refused_at_once_without_a_writer(tmp_path):
    fifo = tmp_path / "report.json"
    os.mkfifo(fifo)
    outcome: list[BaseException] = []

    def read() -> None:
        try:
            read_text(fifo)
        except BaseException as exc:  # handed to the test thread
            outcome.append(exc)

    reader = threading.Thread(target=read, daemon=True)
    reader.start()
    reader.join(timeout=20)
    if reader.is_alive():  # unblock the reader so the test run can end
        os.close(os.open(fifo, os.O_WRONLY | os.O_NONBLOCK))
        pytest.fail("reading a FIFO blocked")
    assert isinstance(outcome[0], ReadError) and "is a FIFO (named pipe)" in str(outcome[0])


@pytest.mark.parametrize("path, kind", [(os.devnull, "a device"), ("/dev/zero", "a device")])
def test_devices_are_refused(path, kind):
    if not os.path.exists(path):
        pytest.skip(f"no {path} here")
    with pytest.raises(ReadError, match=f"is {kind}, not a regular file"):
        read_text(path)


def test_a_directory_is_refused(tmp_path):
    with pytest.raises(ReadError, match="is a directory, not a regular file"):
        read_text(tmp_path)


def test_a_missing_file_is_left_for_the_caller_to_word(tmp_path):
    with pytest.raises(FileNotFoundError):
        read_text(tmp_path / "absent.json")


@pytest.mark.parametrize("text, count", [
    ("268435456", 268435456), ("256MiB", 256 * 1024**2), ("64k", 65536), ("1 GiB", 1024**3),
    (4096, 4096),
])
def test_sizes_parse(text, count):
    assert parse_size(text) == count


@pytest.mark.parametrize("text", ["0", "-5", "12 parsecs", "", True, "1.5MiB"])
def test_bad_sizes_are_refused(text):
    with pytest.raises(ReadError):
        parse_size(text)


def test_nesting_at_the_limit_is_read_and_one_deeper_is_refused():
    at_limit = "[" * MAX_DEPTH + "]" * MAX_DEPTH
    assert loads_json(at_limit, source="ok.json") is not None
    deeper = "[" * (MAX_DEPTH + 1) + "]" * (MAX_DEPTH + 1)
    with pytest.raises(ReadError, match=r"deep\.json: .*nested too deeply"):
        loads_json(deeper, source="deep.json")


def test_deep_objects_are_refused_too():
    value: dict[str, object] = {}
    for _ in range(MAX_DEPTH + 5):
        value = {"k": value}
    with pytest.raises(ReadError, match="nested too deeply"):
        check_depth(value, source="deep.json")


def test_a_long_flat_list_of_trials_is_within_the_limit():
    check_depth({"rows": [{"values": [0.5] * 100_000}]}, source="r.json")


def test_json_syntax_errors_pass_through():
    with pytest.raises(json.JSONDecodeError):
        loads_json("{not json", source="x.json")
