"""One module per `regime` sub-command, each with `register(subparsers)` and `run(args) -> int`."""

# Order shown in `regime --help`. Modules are imported only when their command
# runs, so `regime calc` never pays for Textual, scipy or pyzmq.
COMMANDS: dict[str, str] = {
    "demo": "the operator's screen on the built-in simulated discharge",
    "calc": "regime parameters of one set of readings",
    "watch": "watch a live source (serial line, ZeroMQ, simulator, recording)",
    "replay": "play a recording through the same pipeline and alarms",
    "report": "summarise a recorded shot",
    "simulate": "publish a simulated discharge on ZeroMQ",
    "check": "validate an envelope/config file without running",
    "serve": "the operator's screen in web browsers, read-only, on a run's relay",
}
