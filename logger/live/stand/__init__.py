"""The stand page: the run's result on a phone or tablet propped beside the grinding stand.

`address` parses `--web [HOST:]PORT` and decides who may read the page (a key
beyond loopback); `server` is the aiohttp server on its own thread; `state`
builds the object the page shows; `listener.StandPage` is the pipeline's
listener that hands that object over without ever waiting; `assets/` holds
the page itself (HTML, CSS, JS, no outside files).
"""
