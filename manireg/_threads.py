"""Thread policy for small linear algebra.

Batched local PCA works on thousands of tiny matrices (tens of rows). Multi-threaded BLAS gains nothing on
them and, when another process competes for the cores, its spinning threads slow such loops down by an
order of magnitude (measured here: a geometry read-out of 1,400 points in D = 1024 took 100 s with two
OpenBLAS threads beside a busy process and 7 s with one). Loops over small matrices therefore run under
:func:`single_threaded_blas`.
"""

from __future__ import annotations

from contextlib import contextmanager


@contextmanager
def single_threaded_blas():
    """Limit BLAS to one thread inside the block (restored afterwards)."""
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1, user_api="blas"):
        yield


@contextmanager
def torch_threads(n):
    """Run the block with ``n`` torch threads (``None``: leave the setting alone), restored afterwards."""
    if n is None:
        yield
        return
    import torch

    old = torch.get_num_threads()
    torch.set_num_threads(int(n))
    try:
        yield
    finally:
        torch.set_num_threads(old)
