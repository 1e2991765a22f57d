"""gunicorn settings for a Toeline company server (several worker processes).

    TOELINE_DATA=/var/lib/toeline TOELINE_DATABASE_URL=postgresql://toeline@localhost/toeline \
        gunicorn -c deploy/gunicorn.conf.py

Every setting can be changed from the environment (names below) or on the command line.
Why these values (https://docs.gunicorn.org/en/stable/settings.html):

* ``worker_class = "gthread"``, ``threads``: each worker answers several requests at once on
  threads. A pile save spends most of its time in numpy (the recheck) and waiting on the
  database, and the tablets' requests are short; threads in a process share its caches (the
  pile list, the recheck's).
* ``workers``: processes, each with its own interpreter, so the rechecks of several tablets use
  several cores. About one per core on PostgreSQL; on SQLite keep 2 (WAL lets one writer at a
  time; more processes only queue on the write lock).
* ``preload_app = False``: each worker builds the app after the fork, so it opens its own
  database pool (a connection or a pool thread must never cross a fork).
* ``timeout``: a worker whose main loop is silent this long is restarted. With gthread the loop
  keeps beating while requests run, so this catches a stuck process, not a slow request.
* ``graceful_timeout``: on restart (``kill -HUP``) or stop, requests in hand get this long.
* ``max_requests = 0``: workers are not recycled. A record PDF build runs on a thread of the
  worker that started it; recycling would cut it off (the screen then says "the server stopped
  during the build" and it is started again).
* ``forwarded_allow_ips``: the reverse proxy on the same host (deploy/nginx-toeline.conf); with
  ``TOELINE_PROXY=1`` the app trusts one hop of X-Forwarded-*.
* ``TOELINE_DB_POOL_SIZE``: PostgreSQL connections per worker; threads + 2 (a record build and
  the start-up migration check) unless set. The server's ``max_connections`` must exceed
  workers x pool size (4 x 10 = 40 with the defaults; PostgreSQL's default is 100).
"""

import os

wsgi_app = "deploy.wsgi:app"
bind = os.environ.get("TOELINE_BIND", "127.0.0.1:8000")
workers = int(os.environ.get("TOELINE_WORKERS", "4"))
worker_class = "gthread"
threads = int(os.environ.get("TOELINE_THREADS", "8"))
preload_app = False
timeout = int(os.environ.get("TOELINE_WORKER_TIMEOUT_S", "120"))
graceful_timeout = 60
keepalive = 5
max_requests = 0
forwarded_allow_ips = "127.0.0.1"
accesslog = os.environ.get("TOELINE_ACCESS_LOG", "-")
errorlog = "-"
proc_name = "toeline"
os.environ.setdefault("TOELINE_DB_POOL_SIZE", str(threads + 2))
