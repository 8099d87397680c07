"""clients/python/rimwatch_client.py against a real rimwatchd.

Usage (CTest): /usr/bin/python3 python_client_test.py RIMWATCHD CLIENT_DIR

Starts rimwatchd on a fresh data directory with ipc:// endpoints inside it (a config file, as
tests/daemon/daemon_harness.h does), adds models, feeds pandas DataFrames (integer and date
indexes; invented data from a two-variable VAR(1)), and checks the acknowledgements, the state
(rows, last period, window), health, refusals, idempotent re-feeding and an alert from a
break in the dynamics.
"""

import json
import os
import signal
import subprocess
import sys
import tempfile
import threading
import time
import unittest

import numpy as np
import pandas as pd
import zmq

RIMWATCHD = sys.argv[1] if len(sys.argv) > 1 else None
sys.path.insert(0, sys.argv[2] if len(sys.argv) > 2 else "")
import rimwatch_client  # noqa: E402

SPEC = """name = "brk"
variables = ["a", "b"]
lags = 1
[window]
kind = "sliding"
rows = 200
[training]
rows = 150
"""

DAILY_SPEC = """name = "daily"
variables = ["c", "d"]
lags = 2
"""


def var1(n, rho, seed, start=(0.0, 0.0)):
    """An invented VAR(1): a_t = rho a_{t-1} + e, b_t = 0.3 b_{t-1} + e."""
    rng = np.random.default_rng(seed)
    a, b = start
    out = np.empty((n, 2))
    for t in range(n):
        a = rho * a + rng.standard_normal()
        b = 0.3 * b + rng.standard_normal()
        out[t] = (a, b)
    return out


class PythonClientTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.tmp = tempfile.TemporaryDirectory(prefix="rimwatch-py-")
        d = cls.tmp.name
        cls.ingest = f"ipc://{d}/ingest.sock"
        cls.events = f"ipc://{d}/events.sock"
        with open(os.path.join(d, "rimwatchd.toml"), "w") as f:
            f.write(f'[sockets]\ningest = "{cls.ingest}"\nevents = "{cls.events}"\n')
        cls.log = open(os.path.join(d, "rimwatchd.log"), "w")
        cls.daemon = subprocess.Popen(
            [RIMWATCHD, "--data-dir", os.path.join(d, "data"), "--config",
             os.path.join(d, "rimwatchd.toml")],
            stdin=subprocess.DEVNULL, stdout=cls.log, stderr=cls.log)
        deadline = time.monotonic() + 60
        while not os.path.exists(os.path.join(d, "ingest.sock")):
            if cls.daemon.poll() is not None or time.monotonic() > deadline:
                with open(os.path.join(d, "rimwatchd.log")) as f:
                    raise RuntimeError("rimwatchd did not start: " + f.read())
            time.sleep(0.02)
        cls.client = rimwatch_client.RimwatchClient(cls.ingest, cls.events, timeout=60)

    @classmethod
    def tearDownClass(cls):
        cls.client.close()
        cls.daemon.send_signal(signal.SIGTERM)
        code = cls.daemon.wait(timeout=60)
        cls.log.close()
        with open(os.path.join(cls.tmp.name, "rimwatchd.log")) as f:
            log = f.read()
        cls.tmp.cleanup()
        if code != 0:
            raise RuntimeError(f"rimwatchd exited {code}: {log}")

    def test_1_integer_index_feed_state_and_refeed(self):
        added = self.client.model_add(SPEC)
        self.assertEqual(added["model"], "brk")
        data = var1(600, 0.4, seed=5)
        df = pd.DataFrame(data, columns=["a", "b"], index=pd.RangeIndex(1, 601))
        summary = self.client.feed_dataframe(df, window=128)
        self.assertEqual(summary["rows"], 600)
        self.assertEqual(summary["acked"], 600)
        self.assertEqual(summary["stored"], 1200)
        self.assertEqual(summary["refused"], {})
        state = self.client.state("brk")
        self.assertEqual(state["rows"], 599)  # one row serves as the lag
        self.assertEqual(state["last_period"], "600")
        self.assertEqual(state["fit"]["sample"]["rows"], 200)  # the sliding window
        self.assertEqual(state["fit"]["variables"], ["a", "b"])
        self.assertEqual(len(state["fit"]["coefficients"]), 2 * 3)
        rho = state["stability"]["rho"]
        self.assertTrue(0.0 < rho < 0.9, rho)

        again = self.client.feed_dataframe(df)
        self.assertEqual(again["acked"], 600)
        self.assertEqual(again["stored"], 0)
        self.assertEqual(again["duplicates"], 1200)
        self.assertEqual(self.client.state("brk")["rows"], 599)

    def test_2_date_index_and_missing_cells(self):
        self.client.model_add(DAILY_SPEC)
        data = var1(120, 0.5, seed=9)
        index = pd.date_range("2026-01-01", periods=120, freq="D")
        df = pd.DataFrame(data.copy(), columns=["c", "d"], index=index)
        df.iloc[10, 1] = np.nan  # d of 2026-01-11 arrives later
        summary = self.client.feed_dataframe(df)
        self.assertEqual(summary["acked"], 120)
        self.assertEqual(summary["stored"], 239)
        # The day without d is not a complete row, nor are the rows that need it as a lag.
        self.assertLess(self.client.state("daily")["rows"], 118)
        late = pd.DataFrame({"d": [data[10, 1]]}, index=[index[10]])
        summary = self.client.feed_dataframe(late)
        self.assertEqual((summary["acked"], summary["stored"]), (1, 1), summary)
        state = self.client.state("daily")
        self.assertEqual(state["rows"], 118)  # lags = 2
        self.assertEqual(state["last_period"], "2026-04-30")

    def test_3_refusals_are_reported_not_raised(self):
        df = pd.DataFrame({"a": [1.0], "zz": [2.0]}, index=[601])
        summary = self.client.feed_dataframe(df)
        self.assertEqual(summary["acked"], 0)
        self.assertEqual(summary["refused"], {"unknown_series": 1})
        self.assertEqual(summary["refusals"][0][0], 601)
        with self.assertRaises(rimwatch_client.RimwatchError) as caught:
            self.client.state("nope")
        self.assertEqual(caught.exception.code, "unknown_model")
        with self.assertRaises(ValueError):
            naive = pd.DataFrame({"a": [1.0]}, index=[pd.Timestamp("2026-01-01 10:00")])
            self.client.feed_dataframe(naive)

    def test_4_alert_after_a_break(self):
        stream = self.client.alerts(model="brk", timeout=60)
        time.sleep(0.5)  # the subscription reaches the daemon
        start = tuple(var1(600, 0.4, seed=5)[-1])
        data = var1(800, 0.97, seed=6, start=start)
        df = pd.DataFrame(data, columns=["a", "b"], index=pd.RangeIndex(601, 1401))
        self.assertEqual(self.client.feed_dataframe(df)["acked"], 800)
        alert = next(a for a in stream if a["transition"] == "raised")
        stream.close()
        self.assertEqual(alert["model"], "brk")
        self.assertEqual(alert["transition"], "raised")
        self.assertGreater(int(alert["period"]), 600)
        health = self.client.health()
        self.assertEqual(health["models"][0]["name"], "brk")
        self.assertEqual(health["models"][0]["rows"], 1399)

    def test_5_health_and_list(self):
        names = [m["name"] for m in self.client.model_list()]
        self.assertEqual(names, ["brk", "daily"])
        health = self.client.health()
        self.assertGreaterEqual(health["observations"]["stored"], 1200 + 240 + 1600)
        self.assertEqual(health["rejects"]["unknown_series"], 1)
        self.client.model_drop("daily")
        self.assertEqual([m["name"] for m in self.client.model_list()], ["brk"])


class SilentPeerTest(unittest.TestCase):
    """A stand-in ROUTER that leaves the first requests unanswered: the client resends them on a
    fresh socket after its timeout (a real daemon answers everything it receives)."""

    def test_resend_after_timeout(self):
        with tempfile.TemporaryDirectory(prefix="rimwatch-py-") as d:
            endpoint = f"ipc://{d}/router.sock"
            context = zmq.Context()
            router = context.socket(zmq.ROUTER)
            router.setsockopt(zmq.LINGER, 0)
            router.bind(endpoint)
            state = {"drop": 2, "received": 0, "stop": False}

            def serve():
                while not state["stop"]:
                    if not router.poll(20):
                        continue
                    frames = router.recv_multipart()
                    state["received"] += 1
                    if state["drop"] > 0:
                        state["drop"] -= 1
                        continue
                    seq = json.loads(frames[-1])["seq"]
                    reply = {"seq": seq, "ok": True, "stored": 1, "duplicates": 0,
                             "revisions": 0}
                    router.send_multipart([frames[0], json.dumps(reply).encode()])

            thread = threading.Thread(target=serve)
            thread.start()
            try:
                client = rimwatch_client.RimwatchClient(endpoint, endpoint, timeout=0.3,
                                                        context=context)
                df = pd.DataFrame({"a": np.arange(10.0)}, index=pd.RangeIndex(1, 11))
                summary = client.feed_dataframe(df)
                client.close()
            finally:
                state["stop"] = True
                thread.join()
                router.close()
                context.term()
            self.assertEqual(summary["acked"], 10)
            self.assertEqual(summary["resent"], 2)
            self.assertEqual(state["received"], 12)


if __name__ == "__main__":
    unittest.main(argv=sys.argv[:1], verbosity=2)
