"""Storage: the HDF5 file layout and reader, the one writer, the live-file lock protocol, the
progress file and the state of a sweep."""
