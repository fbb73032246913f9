"""Result files: atomic writes, provenance, units attributes."""
from __future__ import annotations

import h5py
import numpy as np
import pytest

from scan import store


def test_atomic_write_renames_on_success(tmp_path):
    path = tmp_path / "run.h5"
    with store.atomic_h5(path) as handle:
        store.write_attrs(handle, store.provenance("x = 1\n", seed=3))
        store.write_config(handle, "x = 1\n", ("a.b=2",))
        grp = handle.create_group("background")
        store.write_dataset(grp, "N", np.arange(3.0), "e-folds")
        assert not path.exists()
    with h5py.File(path, "r") as handle:
        assert handle["background/N"].attrs["units"] == "e-folds"
        assert handle.attrs["seed"] == 3
        assert handle.attrs["config_sha256"] == store.config_hash("x = 1\n")
        assert handle.attrs["version_numpy"] == np.__version__
        assert list(handle["config"].attrs["overrides"]) == ["a.b=2"]
    assert store.read_config_text(path) == "x = 1\n"


def test_failed_write_leaves_existing_file_untouched(tmp_path):
    path = tmp_path / "run.h5"
    with store.atomic_h5(path) as handle:
        handle.attrs["generation"] = 1
    with pytest.raises(RuntimeError):
        with store.atomic_h5(path) as handle:
            handle.attrs["generation"] = 2
            raise RuntimeError("crash mid-write")
    with h5py.File(path, "r") as handle:
        assert handle.attrs["generation"] == 1
    assert [p.name for p in tmp_path.iterdir()] == ["run.h5"]


def test_reading_a_non_result_file_is_a_clear_error(tmp_path):
    from scan.errors import InputFileError
    junk = tmp_path / "junk.h5"
    junk.write_text("not hdf5")
    with pytest.raises(InputFileError, match="cannot open as HDF5"):
        store.read_config_text(junk)
