"""``model.Ids``: ids held as a numpy array behave as the tuple of strings they stand for.

Reference: Python's own tuple (the type every section's ids had before), compared
operation by operation.
"""

from __future__ import annotations

import pickle

import numpy as np
import pytest

from vesselnet.model import Ids

TEXT = ("aorta", "iliac-l", "äste", "x")


@pytest.fixture
def ids():
    return Ids(np.array(TEXT))


def test_behaves_as_the_tuple(ids):
    assert ids == TEXT and TEXT == ids and ids != TEXT[:-1] and ids != list(TEXT)
    assert hash(ids) == hash(TEXT) and repr(ids) == repr(TEXT) and len(ids) == len(TEXT)
    assert ids[0] == TEXT[0] and ids[-1] == TEXT[-1] and ids[np.int64(2)] == TEXT[2]
    assert ids[1:3] == TEXT[1:3] and list(ids) == list(TEXT) and "äste" in ids
    assert ids + ("y",) == TEXT + ("y",) and ("w",) + ids == ("w",) + TEXT
    assert ids.index("x") == 3 and ids.count("aorta") == 1
    assert dict(zip(ids, range(4))) == dict(zip(TEXT, range(4)))


def test_items_are_plain_strings_without_building_the_tuple(ids):
    first = ids[0]
    assert type(first) is str and ids._tuple is None
    assert np.asarray(ids).tolist() == list(TEXT) and ids._tuple is None


def test_an_array_index_is_refused_like_a_tuple_refuses_it(ids):
    with pytest.raises(TypeError):
        TEXT[np.array([0, 1])]
    with pytest.raises(TypeError):
        ids[np.array([0, 1])]


def test_pickles_for_worker_processes(ids):
    back = pickle.loads(pickle.dumps(ids))
    assert isinstance(back, Ids) and back == TEXT
