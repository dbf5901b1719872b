"""A facility's own client of the relay in plain Python (pyzmq and numpy only): readings, alarm events and states."""
import json
import sys

import numpy as np
import zmq

sock = zmq.Context().socket(zmq.SUB)
sock.connect(sys.argv[1] if len(sys.argv) > 1 else "tcp://127.0.0.1:5590")
sock.setsockopt(zmq.SUBSCRIBE, b"regime.")              # every topic: data, alarm, status, state, action
while True:
    topic, header, *payload = sock.recv_multipart()
    h = json.loads(header)
    if topic == b"regime.data":                          # fields x n little-endian float64 columns
        cols = dict(zip(h["fields"], np.frombuffer(payload[0], "<f8").reshape(len(h["fields"]), h["n"])))
        print("data", h["run"], h["accepted"] + h["n"], "ne", cols["ne"][-1], "Te", cols["Te"][-1], flush=True)
    elif topic == b"regime.alarm":
        e = h["event"]
        print("alarm", e["alarm"], e["previous"], "->", e["state"], e["action"] or "", flush=True)
    elif topic == b"regime.state":
        print("state", h["identity"]["source"], h["accepted"], *(f"{a['alarm']}={a['state']}" for a in h["alarms"]), flush=True)
