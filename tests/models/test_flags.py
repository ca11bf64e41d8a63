"""The per-thread switch behind ``lean_codegen`` and ``pytorch_kernels``."""
from __future__ import annotations

import threading

import pytest

from searcher.models._flags import ThreadFlag


def test_flag_holds_in_its_block_and_thread_only():
    flag = ThreadFlag()
    seen = []
    with flag.on():
        with flag.on():          # nested blocks restore the outer state
            pass
        worker = threading.Thread(target=lambda: seen.append(flag.active))
        worker.start()
        worker.join()
        assert flag.active
    assert not flag.active and seen == [False]


def test_flag_is_restored_after_an_error():
    flag = ThreadFlag()
    with pytest.raises(RuntimeError):
        with flag.on():
            raise RuntimeError("inside")
    assert not flag.active
