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
    "archive": "catalogue every recorded shot in a folder; find, export and trend shots",
    "compare": "overlay up to eight shots aligned at discharge start, with a table of differences",
    "probe": "analyse a file of Langmuir probe sweeps (Te, ne, ni, Vf, Vp with uncertainties)",
    "serve": "the operator's screen in web browsers, read-only, on a run's relay",
}
