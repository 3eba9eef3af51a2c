"""Point-prediction latency of the service on the built demo model (prints figures; not a test).

Target (issue 4): median < 50 ms for one point prediction over HTTP. The script builds the
fictional demo plate into a temporary data directory, serves it with waitress (the production
server, in this process, on a free loopback port) and times POST /models/{id}/predict with one
point from a real HTTP client, after a warm-up request that loads the model into the cache.
It also prints the library-only time of the same prediction for comparison.
Figures recorded in DEVELOPERS.md, "Performance figures" / "Service".
"""

from __future__ import annotations

import json
import statistics
import tempfile
import threading
import time
import urllib.request


def _post(url: str, body: dict) -> bytes:
    req = urllib.request.Request(url, data=json.dumps(body).encode(), method="POST",
                                 headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(req, timeout=30) as resp:
        return resp.read()


def main(n: int = 300) -> None:
    import numpy as np
    from waitress import create_server

    from stressmap.model import predict_points
    from stressmap_api import create_app
    from stressmap_api.demo import ensure_demo
    from stressmap_api.store import get_store

    with tempfile.TemporaryDirectory() as tmp:
        app = create_app({"DATA_DIR": tmp, "JOB_EXECUTOR": "thread"})
        with app.app_context():
            store = get_store()
        t0 = time.perf_counter()
        model_id = ensure_demo(store)
        build_s = time.perf_counter() - t0
        model = store.load(model_id)
        nodes = model.summary["mesh"]["nodes"]

        server = create_server(app, host="127.0.0.1", port=0, threads=4)
        thread = threading.Thread(target=server.run, daemon=True)
        thread.start()
        url = f"http://127.0.0.1:{server.effective_port}/api/v1/models/{model_id}/predict"
        rng = np.random.default_rng(1)
        lons, lats = rng.uniform(-25.0, -5.0, n), rng.uniform(-30.0, -10.0, n)
        _post(url, {"points": [[-15.0, -20.0]]})  # warm-up: loads the model into the cache
        http_ms = []
        for lon, lat in zip(lons, lats):
            t = time.perf_counter()
            _post(url, {"points": [[float(lon), float(lat)]]})
            http_ms.append(1e3 * (time.perf_counter() - t))
        lib_ms = []
        for lon, lat in zip(lons[:100], lats[:100]):
            t = time.perf_counter()
            predict_points(model, [lon], [lat])
            lib_ms.append(1e3 * (time.perf_counter() - t))
        server.close()
        app.extensions["stressmap_jobs"].shutdown()

    med = statistics.median(http_ms)
    p95 = float(np.percentile(http_ms, 95))
    print(f"demo model: {nodes} mesh nodes, built in {build_s:.1f} s")
    print(f"point prediction over HTTP (waitress, {n} requests): median {med:.1f} ms, "
          f"p95 {p95:.1f} ms  [target: median < 50 ms -> {'met' if med < 50 else 'NOT met'}]")
    print(f"same prediction in the library: median {statistics.median(lib_ms):.2f} ms")


if __name__ == "__main__":
    main()
