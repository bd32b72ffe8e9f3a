"""Results files (HDF5 via h5py): write, read back, CSV/PNG exports."""
