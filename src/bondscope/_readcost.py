"""Memory HDF5 itself needs to read a dataset, beyond the array it returns (metadata only).

A filtered (compressed, shuffled, checksummed) chunk is decompressed whole, so
reading 16 numbers stored in one 1 GiB gzip chunk allocates 1 GiB.  The
pre-flight estimate adds these buffers (:func:`bondscope._estimate.estimate`).
"""

from math import prod

__all__ = ["read_buffer_bytes"]


def read_buffer_bytes(dset):
    """Bytes HDF5 allocates besides the result while reading all of ``dset``.

    Returns
    -------
    int
        For a chunked dataset with filters: one chunk's size, twice over with
        the shuffle filter (measured with h5py 3.16 / HDF5 2.0 on a 128 MiB chunk
        of 16 float64 values: gzip, lzf or fletcher32 peak at 1.0 chunk,
        shuffle (alone or with gzip) at 1.9 chunks).  Unfiltered chunks are
        read straight into the result; contiguous datasets need nothing.

    Notes
    -----
    Chunks are decompressed one at a time, so the largest chunk counts, not
    their number.
    """
    chunks = dset.chunks
    if not chunks:
        return 0
    try:
        filters = dset.id.get_create_plist().get_nfilters()
    except (OSError, RuntimeError, ValueError):
        filters = 1     # unknown: count the chunk
    if not filters:
        return 0
    return prod(chunks) * dset.dtype.itemsize * (2 if dset.shuffle else 1)
