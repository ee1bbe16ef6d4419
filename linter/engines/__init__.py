"""The engines that run a table: in memory, in row batches (stream) or in partitions on Dask, and the pass functions they share.

- :mod:`.memory`: the whole table in memory, and :func:`~.memory.build_context`, the context every engine builds;
- :mod:`.stream`: the table file read one row batch at a time (:class:`~.stream.StreamRunner`);
- :mod:`.dask`: partitions on a Dask cluster (:class:`~.dask.DaskRunner`);
- :mod:`.scaled`: the two passes the stream and Dask engines share (:func:`~.scaled.scaled_context`);
- :mod:`.passes`: the pass functions of one row batch;
- :mod:`.batches`: reading a table file in row batches, and choosing the engine.
"""
