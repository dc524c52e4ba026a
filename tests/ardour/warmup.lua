-- Run by tests/tests/ardour_host.rs before the VST3 scan: Ardour's first start in a fresh home
-- notes the bundle as new in its scan log; a bundle scanned before that first start is noted as
-- out of date and not loaded (seen with Debian's Ardour 7.3).
local dir = assert(os.getenv("FIELDGLASS_SESSION_DIR"), "FIELDGLASS_SESSION_DIR")
assert(AudioEngine:set_backend("None (Dummy)", "", ""), "dummy backend")
assert(create_session(dir, "warmup", 48000), "session")
print("FG warm")
