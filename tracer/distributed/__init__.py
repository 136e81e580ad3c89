"""Work spread over Dask: the client (:mod:`.client`) and one render's sample chunks (:mod:`.render`)."""
