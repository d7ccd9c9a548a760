"""Result files: atomic writes, round trip, and checkpoints (no reference values: a storage test)."""
import h5py
import numpy as np
import pytest

from driven_atom.errors import InputError
from driven_atom.result import Checkpoint, Result, is_complete, read_result, write_result


def _result():
    return Result(route="levels", populations={"1s": 0.25, "2p": 0.75, "2p0": 0.75}, ionization=0.0,
                  norm=1.0, times=np.linspace(0, 1, 5),
                  history_populations={"2p0": np.linspace(0, 0.75, 5), "1s": np.linspace(1, 0.25, 5)},
                  series={"norm": np.ones(5)},
                  spectra={"photoelectron": {"energy": np.arange(3.0), "dP_dE": np.ones(3)}},
                  stats={"steps": 10}, warnings=["a warning"], config="[atom]\nZ = 1\n")


def test_round_trip(tmp_path):
    path = write_result(tmp_path / "r.h5", _result())
    assert is_complete(path) and not (tmp_path / "r.h5.tmp").exists()
    back = read_result(path)
    assert back.populations == {"1s": 0.25, "2p": 0.75, "2p0": 0.75}
    assert list(back.history_populations) == ["2p0", "1s"]
    np.testing.assert_array_equal(back.times, np.linspace(0, 1, 5))
    assert back.spectra["photoelectron"]["dP_dE"].tolist() == [1, 1, 1]
    assert back.stats == {"steps": 10} and back.warnings == ["a warning"]
    with h5py.File(path) as f:
        assert "versions" in f.attrs and "host" in f.attrs


def test_incomplete_file_is_not_trusted(tmp_path):
    path = tmp_path / "r.h5"
    ck = Checkpoint(path, physics_hash="abc")
    ck.save({"psi": np.arange(4) + 1j}, {"step": 7})
    assert not is_complete(path)
    with pytest.raises(InputError):
        read_result(path)
    arrays, meta = ck.load()
    assert meta == {"step": 7} and arrays["psi"].tolist() == (np.arange(4) + 1j).tolist()
    assert Checkpoint(path, physics_hash="other").load() is None   # other physics: no resume
    write_result(path, _result())
    assert ck.load() is None and is_complete(path)


def test_garbage_file(tmp_path):
    path = tmp_path / "r.h5"
    path.write_bytes(b"not hdf5")
    assert not is_complete(path)
    assert Checkpoint(path).load() is None
    with pytest.raises(InputError):
        read_result(path)


@pytest.mark.parametrize("damage", ["array byte", "population", "attribute", "missing dataset"])
def test_damaged_content_is_refused(tmp_path, damage):
    path = write_result(tmp_path / "r.h5", _result())
    if damage == "array byte":                            # one bit flipped on disk, file still opens
        with h5py.File(path) as f:
            offset = f["history/series/norm"].id.get_offset()
        raw = bytearray(path.read_bytes())
        raw[offset + 3] ^= 0x10
        path.write_bytes(bytes(raw))
    else:
        with h5py.File(path, "a") as f:
            if damage == "population":
                f["populations/values"][1] = 0.7500000001
            elif damage == "missing dataset":
                del f["populations/labels"]
            else:
                f.attrs["ionization"] = 1e-3
    assert is_complete(path)                              # looks finished ...
    with pytest.raises(InputError, match="damaged"):      # ... but its checksum says otherwise
        read_result(path)
