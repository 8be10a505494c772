"""Engines that read a dataset somewhere other than one process's memory (see ``dask``)."""
