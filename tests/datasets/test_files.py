"""The user's own files: round trips for every format, and each bad input's message."""

import hashlib
import importlib.util
import mmap
import warnings

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from lowdim.datasets import DataWarning, load
from lowdim.errors import InputError


@pytest.fixture
def table():
    # A made-up survey of pond water samples: three readings and the pond each came from.
    rng = np.random.default_rng(0)
    frame = pd.DataFrame(
        {
            "sample_id": np.arange(40),
            "turbidity": rng.normal(5, 1, 40),
            "nitrate": rng.normal(2, 0.5, 40),
            "ph": rng.normal(7, 0.3, 40),
            "pond": rng.choice(["north", "reed bed", "south"], 40),
        }
    )
    return frame


def _features(frame):
    return frame[["turbidity", "nitrate", "ph"]].to_numpy()


def _expected_codes(values):
    return np.unique(values, return_inverse=True)[1]


@pytest.mark.parametrize(("suffix", "sep"), [(".csv", ","), (".tsv", "\t"), (".csv", ";")])
def test_text_round_trip_with_detected_delimiter(tmp_path, table, suffix, sep):
    path = tmp_path / f"ponds{suffix}"
    table.to_csv(path, sep=sep, index=False)
    data = load({"file": str(path), "labels": "pond", "drop": ["sample_id"]})
    assert_allclose(data.X, _features(table))
    assert_array_equal(data.labels, _expected_codes(table["pond"]))
    assert data.meta["classes"] == ["north", "reed bed", "south"]
    assert data.meta["columns"] == ["turbidity", "nitrate", "ph"]
    assert data.name == "ponds" and data.truth is None
    assert data.meta["content_hash"] == hashlib.sha256(path.read_bytes()).hexdigest()


def test_csv_without_header_and_features_option(tmp_path, table):
    path = tmp_path / "plain.csv"
    np.savetxt(path, _features(table), delimiter=",")
    data = load({"file": str(path)})
    assert_allclose(data.X, _features(table))
    assert data.meta["columns"] == ["column_1", "column_2", "column_3"]
    picked = load({"file": str(path), "features": ["column_3", "column_1"]})
    assert_allclose(picked.X, _features(table)[:, [2, 0]])


def test_explicit_delimiter_and_changed_content_changes_the_hash(tmp_path, table):
    path = tmp_path / "ponds.txt"
    table.drop(columns="pond").to_csv(path, sep="|", index=False)
    first = load({"file": str(path), "delimiter": "|", "drop": ["sample_id"]})
    assert_allclose(first.X, _features(table))
    table.loc[0, "ph"] = 9.5
    table.drop(columns="pond").to_csv(path, sep="|", index=False)
    second = load({"file": str(path), "delimiter": "|", "drop": ["sample_id"]})
    assert first.meta["content_hash"] != second.meta["content_hash"]


def test_parquet_round_trip(tmp_path, table):
    pytest.importorskip("pyarrow")
    path = tmp_path / "ponds.parquet"
    table.to_parquet(path)
    data = load({"file": str(path), "labels": "pond", "features": ["ph", "nitrate"]})
    assert_allclose(data.X, table[["ph", "nitrate"]].to_numpy())
    assert_array_equal(data.labels, _expected_codes(table["pond"]))


def test_parquet_without_pyarrow_says_how_to_install(tmp_path, table, monkeypatch):
    path = tmp_path / "ponds.parquet"
    path.write_bytes(b"PAR1 not really")
    real = importlib.util.find_spec
    monkeypatch.setattr(
        importlib.util, "find_spec", lambda name, *a: None if name == "pyarrow" else real(name)
    )
    with pytest.raises(InputError, match=r"needs pyarrow.*pip install 'lowdim\[parquet\]'"):
        load({"file": str(path)})


def test_npy_is_memory_mapped(tmp_path, table):
    path = tmp_path / "ponds.npy"
    np.save(path, np.ascontiguousarray(_features(table)))  # a Fortran-order file is copied
    data = load({"file": str(path)})
    assert_allclose(data.X, _features(table))
    assert data.meta["memory_mapped"] is True
    # The array still reads from the file: following its bases leads to the memory map.
    base, chain = data.X, []
    while base is not None:
        chain.append(type(base))
        base = getattr(base, "base", None)
    assert mmap.mmap in chain or np.memmap in chain
    assert_allclose(load({"file": str(path), "drop": [1]}).X, _features(table)[:, [0, 2]])


def test_npz_round_trip_with_labels_and_truth(tmp_path, table):
    path = tmp_path / "ponds.npz"
    truth = np.column_stack([np.arange(40.0), np.arange(40.0) ** 2])
    np.savez(path, X=_features(table), labels=table["pond"].to_numpy(dtype=str), truth=truth)
    data = load({"file": str(path)})
    assert_allclose(data.X, _features(table))
    assert_array_equal(data.labels, _expected_codes(table["pond"]))
    assert_allclose(data.truth, truth)
    np.savez(path, X=_features(table), site=np.arange(40) % 2)
    assert_array_equal(load({"file": str(path), "labels": "site"}).labels, np.arange(40) % 2)


def test_preprocessing_applies_to_files(tmp_path, table):
    path = tmp_path / "ponds.csv"
    table.to_csv(path, index=False)
    data = load({"file": str(path), "labels": "pond", "drop": ["sample_id"], "scale": "minmax"})
    assert_allclose(data.X.min(axis=0), 0) and assert_allclose(data.X.max(axis=0), 1)


# --- bad input, each with its own message


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


def test_missing_file_names_the_path(tmp_path):
    missing = str(tmp_path / "nowhere.csv")
    with pytest.raises(FileNotFoundError) as info:
        load({"file": missing})
    assert missing in str(info.value) and info.value.filename == missing


@pytest.mark.parametrize("text", ["", "\n\n  \n"])
def test_empty_file(tmp_path, text):
    with pytest.raises(InputError, match=r"nowt\.csv' is empty"):
        load({"file": _write(tmp_path, "nowt.csv", text)})


def test_header_without_rows(tmp_path):
    with pytest.raises(InputError, match="has a header line but no data rows"):
        load({"file": _write(tmp_path, "h.csv", "a,b,c\n")})


def test_single_row(tmp_path):
    with pytest.raises(InputError, match="has only one data row"):
        load({"file": _write(tmp_path, "one.csv", "a,b\n1,2\n")})


def test_text_in_a_numeric_column_names_column_and_row(tmp_path):
    path = _write(tmp_path, "t.csv", "depth,width\n1,2\n3,4\n5,deep\n7,8\n")
    with pytest.raises(InputError) as info:
        load({"file": path})
    message = str(info.value)
    assert "column 'width' holds text" in message
    assert "'deep' at data row 3 (counting from 1, header not counted)" in message


def test_missing_values_are_counted_and_located(tmp_path):
    path = _write(tmp_path, "m.csv", "a,b,c\n1,2,3\n4,,6\n7,8,\n1,2,5\n")
    with pytest.raises(InputError) as info:
        load({"file": path})
    message = str(info.value)
    assert "has 2 missing values" in message
    assert "row 2 column 'b', row 3 column 'c'" in message


def test_infinite_values(tmp_path):
    path = _write(tmp_path, "i.csv", "a,b\n1,2\n3,inf\n5,6\n")
    with pytest.raises(InputError, match=r"1 infinite values \(first at data row 2 column 'b'"):
        load({"file": path})


def test_constant_columns_are_dropped_with_a_warning(tmp_path):
    path = _write(tmp_path, "c.csv", "a,flat,b\n1,5,2\n3,5,1\n4,5,0\n")
    with pytest.warns(DataWarning, match=r"dropped 1 constant column\(s\) \('flat'\)"):
        data = load({"file": path})
    assert data.X.shape == (3, 2)
    assert data.meta["dropped_columns"] == ["flat"]
    assert any("flat" in w for w in data.meta["warnings"])


def test_all_columns_constant_is_an_error(tmp_path):
    path = _write(tmp_path, "cc.csv", "a,b\n1,5\n1,5\n")
    with pytest.raises(InputError, match=r"every column is constant \('a', 'b'\)"):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DataWarning)
            load({"file": path})


def test_duplicate_rows_are_counted_with_a_warning(tmp_path):
    path = _write(tmp_path, "d.csv", "a,b\n1,2\n3,4\n1,2\n5,6\n3,4\n1,2\n")
    with pytest.warns(DataWarning, match=r"has 3 duplicate row\(s\) \(the first at data row 3"):
        data = load({"file": path})
    assert data.meta["n_duplicates"] == 3
    assert data.X.shape == (6, 2)  # counted, not removed


def test_absent_label_column_lists_the_columns(tmp_path, table):
    path = tmp_path / "ponds.csv"
    table.to_csv(path, index=False)
    with pytest.raises(InputError) as info:
        load({"file": str(path), "labels": "ponds"})
    message = str(info.value)
    assert "has no column 'ponds' (named in `labels`) (did you mean 'pond'?)" in message
    assert "'sample_id', 'turbidity', 'nitrate', 'ph', 'pond'" in message


def test_absent_feature_and_drop_columns(tmp_path, table):
    path = tmp_path / "ponds.csv"
    table.to_csv(path, index=False)
    with pytest.raises(InputError, match=r"no column 'nitrates' \(named in `features`\)"):
        load({"file": str(path), "features": ["ph", "nitrates"]})
    with pytest.raises(InputError, match=r"no column 'id' \(named in `drop`\)"):
        load({"file": str(path), "drop": ["id"]})


def test_binary_file(tmp_path):
    path = tmp_path / "image.csv"
    path.write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR")
    with pytest.raises(InputError, match="looks like a binary file"):
        load({"file": str(path)})


def test_non_utf8_file(tmp_path):
    path = tmp_path / "latin.csv"
    path.write_bytes("température,débit\n1,2\n3,4\n".encode("latin-1"))
    with pytest.raises(InputError, match=r"is not UTF-8 text \(byte 0xe9 at byte offset 4"):
        load({"file": str(path)})


def test_ragged_rows(tmp_path):
    path = _write(tmp_path, "r.csv", "a,b\n1,2\n3,4,5\n6,7\n")
    with pytest.raises(InputError, match="could not be parsed with delimiter ','"):
        load({"file": path})


def test_npy_problems(tmp_path):
    flat = tmp_path / "flat.npy"
    np.save(flat, np.arange(5.0))
    with pytest.raises(InputError, match=r"is a 1-D array of shape \(5,\).*reshape\(-1, 1\)"):
        load({"file": str(flat)})
    words = tmp_path / "words.npy"
    np.save(words, np.array([["a", "b"], ["c", "d"]]))
    with pytest.raises(InputError, match="not numbers"):
        load({"file": str(words)})
    junk = tmp_path / "junk.npy"
    junk.write_bytes(b"not an array at all")
    with pytest.raises(InputError, match="is not a readable .npy array"):
        load({"file": str(junk)})
    with_nan = tmp_path / "nan.npy"
    np.save(with_nan, np.array([[1.0, np.nan], [2.0, 3.0]]))
    with pytest.raises(InputError, match=r"1 missing values \(first at data row 1 column '1'"):
        load({"file": str(with_nan)})


def test_npz_problems(tmp_path):
    path = tmp_path / "a.npz"
    np.savez(path, data=np.zeros((3, 2)))
    with pytest.raises(InputError, match=r"has no array 'X' \(its keys are 'data'\)"):
        load({"file": str(path)})
    np.savez(path, X=np.eye(3), labels=np.arange(2))
    with pytest.raises(InputError, match="the labels 'labels' have 2 entries but 'X' has 3 rows"):
        load({"file": str(path)})
    np.savez(path, X=np.eye(3))
    with pytest.raises(InputError, match=r"has no array 'kind' \(named in `labels`\)"):
        load({"file": str(path), "labels": "kind"})


def test_a_folder_is_not_a_file(tmp_path):
    folder = tmp_path / "data.csv"
    folder.mkdir()
    with pytest.raises(InputError, match="is a folder, not a file"):
        load({"file": str(folder)})
