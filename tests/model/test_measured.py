"""Measured FRF files: both forms read back what was written; every error names file and field."""

import numpy as np
import pytest

from dampctl.errors import MeasurementError, UsageError
from dampctl.model.measured import MeasuredFRF, load_frf

FREQ = np.array([10.0, 20.0, 30.0, 40.0, 50.0])
FRF = (np.arange(2 * 1 * 5) + 1j * np.arange(10, 20)).reshape(2, 1, 5) * 1e-3


def _npz(path, **changes):
    arrays = {"freq_hz": FREQ, "frf": FRF, "inputs": np.array(["hammer"]),
              "outputs": np.array(["a1", "a2"]),
              "output_kind": np.array(["acceleration", "velocity"])}
    arrays.update(changes)
    arrays = {k: v for k, v in arrays.items() if v is not None}
    np.savez(path, **arrays)
    return path


def _csv(path, frf=FRF, coherence=None, header=None, rows=None):
    names = ["freq_hz"]
    for o in ("a1", "a2"):
        names += [f"{o}/hammer re", f"{o}/hammer im"]
        if coherence is not None:
            names.append(f"{o}/hammer coherence")
    lines = [",".join(header or names)]
    for k, f in enumerate(FREQ):
        values = [f]
        for o in range(2):
            values += [frf[o, 0, k].real, frf[o, 0, k].imag]
            if coherence is not None:
                values.append(coherence[o, 0, k])
        lines.append(",".join(repr(float(v)) for v in values))
    path.write_text("\n".join(lines + (rows or [])) + "\n")
    return path


def test_npz_reads_back(tmp_path):
    coherence = np.full(FRF.shape, 0.9)
    data = load_frf(_npz(tmp_path / "t.npz", coherence=coherence))
    np.testing.assert_array_equal(data.frf, FRF)
    np.testing.assert_array_equal(data.freq_hz, FREQ)
    assert data.outputs == ("a1", "a2") and data.inputs == ("hammer",)
    assert data.output_kinds == ("acceleration", "velocity")
    assert data.channels == ("a1/hammer", "a2/hammer")
    np.testing.assert_array_equal(data.kind_orders, [2, 1])
    np.testing.assert_array_equal(data.coherence, coherence)
    assert data.channel("a2/hammer") == (1, 0)


def test_csv_reads_back_with_kinds_from_the_caller(tmp_path):
    coherence = np.full(FRF.shape, 0.75)
    data = load_frf(_csv(tmp_path / "t.csv", coherence=coherence),
                    output_kinds={"a1": "acceleration", "a2": "velocity"})
    np.testing.assert_allclose(data.frf, FRF, rtol=1e-15)
    assert data.output_kinds == ("acceleration", "velocity")
    np.testing.assert_array_equal(data.coherence, coherence)
    same = load_frf(_csv(tmp_path / "u.csv"), output_kinds="displacement")
    assert same.output_kinds == ("displacement", "displacement") and same.coherence is None


@pytest.mark.parametrize("changes, match", [
    ({"frf": None}, r"t\.npz: frf: missing array"),
    ({"extra": np.ones(3)}, r"t\.npz: extra: unknown array"),
    ({"frf": FRF[:, :, :4]}, r"frf: expected shape \(2, 1, 5\)"),
    ({"frf": np.where(np.arange(5) == 2, np.nan, FRF)}, r"frf: a1/hammer at 30 Hz is not finite"),
    ({"freq_hz": FREQ[::-1]}, "freq_hz: frequencies must be finite, >= 0 and strictly"),
    ({"output_kind": np.array(["acceleration", "strain"])}, "output 'a2': kind must be one of"),
    ({"outputs": np.array(["a1", "a1"])}, "outputs: name 'a1' is repeated"),
    ({"inputs": np.array(["x/y"])}, r"inputs: invalid name 'x/y'"),
    ({"inputs": np.array([1])}, "inputs: expected an array of strings"),
    ({"coherence": np.full(FRF.shape, 1.5)}, r"coherence: values must be in \[0, 1\]"),
    ({"freq_hz": np.array(["a"] * 5)}, "freq_hz: expected numbers"),
])
def test_npz_errors_name_file_and_array(tmp_path, changes, match):
    with pytest.raises(MeasurementError, match=match):
        load_frf(_npz(tmp_path / "t.npz", **changes))


def test_csv_errors_name_file_and_column(tmp_path):
    bad = _csv(tmp_path / "t.csv", rows=["60.0,1,2,x,4"])
    with pytest.raises(MeasurementError,
                       match=r"t\.csv: column 4 \(a2/hammer re\): line 7: not a number \('x'\)"):
        load_frf(bad, output_kinds="velocity")
    header = ["freq_hz", "a1/hammer re", "a1/hammer im", "a2/hammer re", "a2/hammer phase"]
    with pytest.raises(MeasurementError, match=r"column 5 \(a2/hammer phase\): expected"):
        load_frf(_csv(tmp_path / "h.csv", header=header), output_kinds="velocity")
    header = ["freq_hz", "a1/hammer re", "a1/hammer im", "a2/hammer re", "a1/hammer re"]
    with pytest.raises(MeasurementError, match=r"column 5 .*repeated column"):
        load_frf(_csv(tmp_path / "r.csv", header=header), output_kinds="velocity")
    header = ["f", "a1/hammer re", "a1/hammer im", "a2/hammer re", "a2/hammer im"]
    with pytest.raises(MeasurementError, match="column 1: the first column must be freq_hz"):
        load_frf(_csv(tmp_path / "f.csv", header=header), output_kinds="velocity")
    short = tmp_path / "s.csv"
    short.write_text("freq_hz,a1/h re,a1/h im,a2/h re\n1,2,3,4\n")
    with pytest.raises(MeasurementError, match="missing column 'a2/h im'"):
        load_frf(short, output_kinds="velocity")


def test_output_kinds_are_required_for_csv_only(tmp_path):
    with pytest.raises(UsageError, match="does not say what its outputs measure"):
        load_frf(_csv(tmp_path / "t.csv"))
    with pytest.raises(UsageError, match="no output kind for a2"):
        load_frf(_csv(tmp_path / "t.csv"), output_kinds={"a1": "velocity"})
    with pytest.raises(UsageError, match="'a3', which is not an output"):
        load_frf(_csv(tmp_path / "t.csv"), output_kinds={"a1": "velocity", "a2": "velocity",
                                                         "a3": "velocity"})
    with pytest.raises(UsageError, match="states its output kinds"):
        load_frf(_npz(tmp_path / "t.npz"), output_kinds="velocity")


def test_unreadable_files(tmp_path):
    with pytest.raises(MeasurementError, match=r"expected a \.npz or \.csv file"):
        load_frf(tmp_path / "t.txt")
    with pytest.raises(MeasurementError, match="cannot read the file"):
        load_frf(tmp_path / "missing.npz")
    (tmp_path / "bad.npz").write_bytes(b"not a zip")
    with pytest.raises(MeasurementError, match=r"not a numpy \.npz archive"):
        load_frf(tmp_path / "bad.npz")
    np.save(tmp_path / "one.npy", FREQ)
    (tmp_path / "one.npz").write_bytes((tmp_path / "one.npy").read_bytes())
    with pytest.raises(MeasurementError, match="single array"):
        load_frf(tmp_path / "one.npz")


def test_band_cuts_frequencies():
    data = MeasuredFRF(FREQ, FRF, ("a1", "a2"), ("h",), ("velocity", "velocity"))
    cut = data.band(20.0, 50.0)
    np.testing.assert_array_equal(cut.freq_hz, FREQ[1:])
    np.testing.assert_array_equal(cut.frf, FRF[:, :, 1:])
    with pytest.raises(UsageError, match="holds 2 measured frequencies"):
        data.band(30.0, 40.0)
    with pytest.raises(UsageError, match="unknown channel 'a3/h'"):
        data.channel("a3/h")
