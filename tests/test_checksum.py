"""Result files carry a checksum (root attribute ``checksum = "sha256:..."``,
selfcon/output/checksum.py): a file damaged after it was written is refused as bad input
(exit 2, "damaged") by load_result, show, plot and export, never read back as data; a file
from before checksums is read with a warning.  Each case asserts the exit code, the
message, and that nothing existing changed and nothing new was written.
"""
from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from selfcon.errors import ResultFileError, UncheckedResultWarning
from selfcon.output.result import load_result, save_result, verify_result_file

OLD = Path(__file__).resolve().parent / "data" / "result_before_scales.h5"


@pytest.fixture
def saved(tmp_path, make_result):
    p = tmp_path / "r.h5"
    save_result(make_result(), p)
    return p


def _write_at(path, offset, data):
    with open(path, "r+b") as fh:
        fh.seek(offset)
        fh.write(data)


def _data_offset(path, name):
    import h5py
    with h5py.File(path, "r") as f:
        ds = f[name]
        return ds.id.get_offset(), ds.id.get_storage_size()


def test_every_result_file_carries_a_checksum_that_matches(saved, make_result, assert_results_equal):
    import h5py
    with h5py.File(saved, "r") as f:
        value = f.attrs["checksum"]
    assert re.fullmatch(r"sha256:[0-9a-f]{64}", value)          # README.md, "Result file (HDF5)"
    assert verify_result_file(saved) == "ok"
    assert_results_equal(make_result(), load_result(saved))      # read without a warning or change
    # the image a batch worker builds carries the same checksum as the file (same bytes)
    from selfcon.output.result import result_image
    img = result_image(make_result())
    m = re.search(rb"sha256:[0-9a-f]{64}", img)
    assert m is not None and m.group().decode() == value


def test_one_changed_number_is_damage(saved, run_cli, tmp_path):
    import h5py
    with h5py.File(saved, "r+") as f:
        f["profile/potential"][3] += 1e-9                        # a plausible value, silently wrong
    before = saved.read_bytes()
    assert verify_result_file(saved) == "checksum mismatch"
    with pytest.raises(ResultFileError, match="damaged result file: its contents do not match the checksum"):
        load_result(saved)
    for argv, made in ((("show", saved), None), (("plot", saved, "-o", tmp_path / "f.png"), tmp_path / "f.png"),
                       (("export", saved, "--csv", tmp_path / "csv"), tmp_path / "csv")):
        code, out, err = run_cli(*argv)
        assert code == 2, err                                    # README.md, "Command line": exit codes
        assert f"{saved}: damaged result file" in err and "Traceback" not in err
        assert made is None or not made.exists()
    assert saved.read_bytes() == before                          # the file itself is left as it was


def test_changed_summary_attribute_is_damage(saved):
    import h5py
    with h5py.File(saved, "r+") as f:
        f["summary"].attrs["electron_sheet_density_cm2"] = 9.99e11
    assert verify_result_file(saved) == "checksum mismatch"
    with pytest.raises(ResultFileError, match="damaged"):
        load_result(saved)


def test_random_bytes_in_the_data_are_refused(saved, run_cli):
    offset, size = _data_offset(saved, "profile/potential")
    assert size > 0
    rng = np.random.default_rng(23)
    _write_at(saved, offset, rng.bytes(min(size, 4096)))
    code, out, err = run_cli("show", saved)
    assert code == 2 and "damaged result file" in err and out == ""


def test_4kb_of_random_bytes_anywhere_never_read_as_data(tmp_path, make_result, run_cli, assert_results_equal):
    # 4 KB of random bytes at 24 places (a seeded generator): each file is either refused with
    # exit 2 or reads back exactly what was written (the bytes fell where nothing is stored)
    src = tmp_path / "src.h5"
    want = make_result()
    save_result(want, src)
    good = src.read_bytes()
    rng = np.random.default_rng(2026)
    refused = 0
    for k in range(24):
        p = tmp_path / f"hit{k}.h5"
        damaged = bytearray(good)
        at = int(rng.integers(0, max(1, len(good) - 4096)))
        damaged[at:at + 4096] = rng.bytes(4096)
        p.write_bytes(bytes(damaged))
        code, out, err = run_cli("show", p, "--json")
        if code == 2:
            refused += 1
            assert "Traceback" not in err and (f"{p}:" in err)
        else:
            assert code == 0, err
            assert_results_equal(want, load_result(p))
    assert refused >= 20            # almost every byte of a small file is data or structure


def test_truncated_and_garbage_files(saved, tmp_path, run_cli):
    trunc = tmp_path / "trunc.h5"
    trunc.write_bytes(saved.read_bytes()[: saved.stat().st_size // 2])
    garbage = tmp_path / "garbage.h5"
    garbage.write_bytes(np.random.default_rng(1).bytes(8192))
    assert verify_result_file(trunc).startswith("unreadable")
    assert verify_result_file(garbage) == "not an HDF5 file"
    assert verify_result_file(tmp_path / "gone.h5") == "missing"
    for p in (trunc, garbage):
        code, _, err = run_cli("show", p)
        assert code == 2 and f"{p}:" in err


def test_file_from_before_checksums_reads_with_a_warning(run_cli, make_result, assert_results_equal):
    # tests/data/result_before_scales.h5 was written by an older selfcon (no checksum attribute)
    assert verify_result_file(OLD) == "unchecked"
    with pytest.warns(UncheckedResultWarning, match="written before result files carried a checksum"):
        back = load_result(OLD)
    want = make_result(n=21)
    want.provenance["numpy_version"] = "2.4.6"                    # as stored in the file
    assert_results_equal(want, back)
    code, out, err = run_cli("show", OLD)
    assert code == 0
    assert f"selfcon: warning: {OLD}: written before result files carried a checksum" in err
