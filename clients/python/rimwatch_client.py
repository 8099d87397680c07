"""A small Python client for rimwatchd (the wire protocol of schemas/wire/*.json).

    client = RimwatchClient("tcp://127.0.0.1:7261", "tcp://127.0.0.1:7262")
    client.model_add(open("desk.toml").read())
    summary = client.feed_dataframe(df)          # index = periods, columns = series
    print(client.state("desk")["stability"])
    for alert in client.alerts(model="desk"):    # blocks; one dict per alert transition
        print(alert["monitor"], alert["transition"], alert["message"])

Needs pyzmq (Debian: python3-zmq) and, for feed_dataframe, pandas (python3-pandas). Run with
the Python that has them (/usr/bin/python3 on Debian).

Requests go over one DEALER socket, pipelined: up to `window` wait for their acknowledgement at
once. An acknowledgement means the observation is on disk. Requests not acknowledged within
`timeout` seconds are sent again on a fresh socket; rimwatchd stores an identical value once and
answers a repeat as a duplicate, so resending (or feeding the same frame twice) is safe.

Alerts are statistical evidence, not trading or policy advice.
"""

import datetime as _dt
import json
import math
import numbers
import time

import zmq

__all__ = ["RimwatchClient", "RimwatchError", "AlertStream"]

# Resend rounds in a row that bring no reply at all before feed_dataframe gives up.
MAX_SILENT_ROUNDS = 3


class RimwatchError(Exception):
    """The daemon refused a request: .code is the wire error code, .message its sentence."""

    def __init__(self, code, message):
        super().__init__(f"{code}: {message}")
        self.code = code
        self.message = message


def _period(label):
    """A DataFrame index label as a wire period: an integer, or a date / timestamp string."""
    if isinstance(label, bool):
        raise ValueError(f"period {label!r}: a boolean is not a period")
    if isinstance(label, numbers.Integral):
        return int(label)
    if isinstance(label, str):
        text = label.strip()
        digits = text[1:] if text.startswith("-") else text
        return int(text) if digits.isdigit() else text
    # pandas.Timestamp is a datetime.datetime; check datetime before date (it is a date too).
    if isinstance(label, _dt.datetime):
        if label.tzinfo is None:
            if (label.hour, label.minute, label.second, label.microsecond) == (0, 0, 0, 0) and \
                    getattr(label, "nanosecond", 0) == 0:
                return label.strftime("%Y-%m-%d")
            raise ValueError(f"period {label}: a timestamp needs a time zone "
                             "(e.g. df.tz_localize('UTC')); dates need no time of day")
        return label.isoformat()
    if isinstance(label, _dt.date):
        return label.isoformat()
    raise ValueError(f"period {label!r}: use integers, dates or zoned timestamps as the index")


class AlertStream:
    """Iterator over alert events (dicts, schemas/wire/event.alert.schema.json).

    Subscribes when created, so alerts published from then on are seen (after the
    subscription reaches the daemon, typically within milliseconds). Iteration stops after
    `timeout` seconds without an alert (None: never)."""

    def __init__(self, context, events_endpoint, model=None, timeout=None):
        self._model = model
        self._timeout = timeout
        self._socket = context.socket(zmq.SUB)
        self._socket.setsockopt(zmq.LINGER, 0)
        self._socket.setsockopt_string(zmq.SUBSCRIBE, "alert." + (model or ""))
        self._socket.connect(events_endpoint)

    def __iter__(self):
        return self

    def __next__(self):
        deadline = None if self._timeout is None else time.monotonic() + self._timeout
        while True:
            wait = None if deadline is None else max(0.0, deadline - time.monotonic())
            if wait is not None and wait <= 0.0:
                raise StopIteration
            if not self._socket.poll(None if wait is None else int(wait * 1000) + 1):
                continue
            topic, body = self._socket.recv_multipart()
            topic = topic.decode()
            # Subscriptions are prefixes: "alert.ab" arrives for model "a".
            if self._model is not None and topic != "alert." + self._model:
                continue
            return json.loads(body)

    def close(self):
        self._socket.close()


class RimwatchClient:
    def __init__(self, endpoint="tcp://127.0.0.1:7261", events="tcp://127.0.0.1:7262",
                 timeout=30.0, context=None):
        self.endpoint = endpoint
        self.events_endpoint = events
        self.timeout = float(timeout)
        self._context = context or zmq.Context.instance()
        self._socket = None
        self._seq = 0
        self._open()

    def _open(self):
        if self._socket is not None:
            self._socket.close()
        self._socket = self._context.socket(zmq.DEALER)
        self._socket.setsockopt(zmq.LINGER, 0)
        self._socket.setsockopt(zmq.SNDHWM, 0)
        self._socket.setsockopt(zmq.RCVHWM, 0)
        self._socket.connect(self.endpoint)

    def close(self):
        if self._socket is not None:
            self._socket.close()
            self._socket = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def _next_seq(self):
        self._seq += 1
        return self._seq

    def _receive(self, timeout_s):
        if not self._socket.poll(max(0, int(timeout_s * 1000))):
            return None
        return json.loads(self._socket.recv_multipart()[-1])

    # ---- control requests ---------------------------------------------------------------------
    def call(self, request_type, **fields):
        """One request and its reply (a dict); RimwatchError when refused, TimeoutError when no
        reply comes within the timeout."""
        seq = self._next_seq()
        message = dict(type=request_type, seq=seq, **fields)
        self._socket.send(json.dumps(message, allow_nan=False).encode())
        deadline = time.monotonic() + self.timeout
        while True:
            left = deadline - time.monotonic()
            reply = self._receive(left) if left > 0 else None
            if reply is None:
                self._open()  # late replies to this request must not meet the next one
                raise TimeoutError(f"no reply from rimwatchd at {self.endpoint} within "
                                   f"{self.timeout} s to {request_type}")
            if reply.get("seq") != seq:
                continue
            if not reply.get("ok"):
                raise RimwatchError(reply.get("code"), reply.get("message"))
            return reply

    def model_add(self, spec_text):
        return self.call("model.add", spec=spec_text)

    def model_drop(self, name):
        return self.call("model.drop", model=name)

    def model_list(self):
        return self.call("model.list")["models"]

    def state(self, model):
        return self.call("state", model=model)

    def health(self):
        return self.call("health")

    # ---- data ---------------------------------------------------------------------------------
    def feed_dataframe(self, df, window=1000):
        """Sends a DataFrame: index = periods (integers, dates, or zoned timestamps), columns =
        series names, one row request per index label. Missing cells (NaN) are left out; a row
        with none left is skipped. Returns a summary dict: rows, sent, acked, stored,
        duplicates, revisions, refused (count by code) and refusals ([(period, code, message)]).
        Raises TimeoutError (with .summary) when acknowledgements stop coming."""
        messages = []
        columns = [str(c) for c in df.columns]
        for label, row in zip(df.index, df.itertuples(index=False, name=None)):
            values = {}
            for name, value in zip(columns, row):
                if value is None:
                    continue
                value = float(value)
                if math.isnan(value):
                    continue
                if math.isinf(value):
                    raise ValueError(f"period {label}, series {name}: {value} is not finite")
                values[name] = value
            if values:
                period = _period(label)
                messages.append((period, {"type": "row", "period": period, "values": values}))
        summary = {"rows": len(messages), "sent": 0, "resent": 0, "acked": 0, "stored": 0,
                   "duplicates": 0, "revisions": 0, "refused": {}, "refusals": []}
        first_seq = self._seq + 1
        self._seq += len(messages)
        done = [False] * len(messages)
        pending = list(range(len(messages)))[::-1]  # a stack, next request on top
        in_flight = set()
        sent_once = set()
        silent_rounds = 0
        last_reply = time.monotonic()
        remaining = len(messages)
        while remaining:
            while pending and len(in_flight) < window:
                i = pending.pop()
                body = dict(messages[i][1], seq=first_seq + i)
                self._socket.send(json.dumps(body, allow_nan=False).encode())
                summary["resent" if i in sent_once else "sent"] += 1
                sent_once.add(i)
                in_flight.add(i)
            reply = self._receive(0.2)
            while reply is not None:
                i = reply.get("seq", 0) - first_seq if isinstance(reply.get("seq"), int) else -1
                if 0 <= i < len(messages) and not done[i]:
                    done[i] = True
                    in_flight.discard(i)
                    remaining -= 1
                    silent_rounds = 0
                    last_reply = time.monotonic()
                    if reply.get("ok"):
                        summary["acked"] += 1
                        for key in ("stored", "duplicates", "revisions"):
                            summary[key] += int(reply.get(key, 0))
                    else:
                        code = reply.get("code", "unknown")
                        summary["refused"][code] = summary["refused"].get(code, 0) + 1
                        summary["refusals"].append((messages[i][0], code, reply.get("message")))
                reply = self._receive(0) if remaining else None
            if in_flight and time.monotonic() - last_reply > self.timeout:
                silent_rounds += 1
                if silent_rounds > MAX_SILENT_ROUNDS:
                    error = TimeoutError(f"rimwatchd at {self.endpoint} stopped acknowledging: "
                                         f"{remaining} requests unanswered")
                    error.summary = summary
                    raise error
                self._open()  # a fresh socket: late replies of the old one are dropped
                pending.extend(sorted(in_flight, reverse=True))
                in_flight.clear()
                last_reply = time.monotonic()
        return summary

    # ---- events -------------------------------------------------------------------------------
    def alerts(self, model=None, timeout=None):
        """An AlertStream: alert events as dicts, of one model or all; subscribes at once."""
        return AlertStream(self._context, self.events_endpoint, model=model, timeout=timeout)
