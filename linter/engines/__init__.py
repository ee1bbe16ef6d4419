"""The engines that run a table: in memory, in row batches (stream) or in partitions on Dask, and the pass functions they share."""
