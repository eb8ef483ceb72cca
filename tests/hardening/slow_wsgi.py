"""The service app plus one deliberately slow route, for the gunicorn drain and kill tests.

``GET /test/slow?s=<seconds>`` sleeps (at most 10 s) and answers 200; every
other route is the real service, under the real gunicorn configuration.
"""

import time

from flask import jsonify, request

from service.api.app import create_app

app = create_app()


@app.get("/test/slow")
def slow():
    seconds = min(float(request.args.get("s", "1")), 10.0)
    time.sleep(seconds)
    return jsonify({"slept_s": seconds})
