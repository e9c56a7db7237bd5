"""The operator page: a web face of the runner for the person at the bench.

``benchgate serve`` starts it. :mod:`.desk` runs units on the same runner as ``benchgate run``
(one at a time per station, in a worker thread), :mod:`.face` is the page's side of the
runner's interface to the person at the bench, :mod:`.app` the web application (Starlette),
:mod:`.guard` who may use it, :mod:`.state` what every open page shows, :mod:`.lot` the tally,
earlier runs and the capture picture, :mod:`.server` running it under uvicorn with a safe stop.
"""
