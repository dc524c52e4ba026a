-- Run by tests/tests/ardour_host.rs through `ardour7-lua` (Ardour's headless Lua session tool).
-- A session on the dummy audio backend with white noise on its inputs; a 16-channel (third
-- order) track "Amb" with Fieldglass inserted, monitoring its input and recording it; a second
-- 16-channel track "Out" recording Amb's output. The test compares the two recordings.
-- The session folder comes in the environment (FIELDGLASS_SESSION_DIR).
local dir = assert(os.getenv("FIELDGLASS_SESSION_DIR"), "FIELDGLASS_SESSION_DIR")
local seconds = tonumber(os.getenv("FIELDGLASS_SECONDS") or "3")

-- Software monitoring, so a track plays its input through its processors while recording.
ARDOUR.config():set_monitoring_model(ARDOUR.MonitorModel.SoftwareMonitoring)
-- Not listed by available_backends() in Debian's build, but present and selectable by name.
local backend = assert(AudioEngine:set_backend("None (Dummy)", "", ""), "dummy backend")
backend:set_device_name("Uniform White Noise")
local s = assert(create_session(dir, "fieldglass", 48000), "session")

local amb = s:new_audio_track(16, 16, nil, 1, "Amb", ARDOUR.PresentationInfo.max_order,
  ARDOUR.TrackMode.Normal, true, false):front()
local out = s:new_audio_track(16, 16, nil, 1, "Out", ARDOUR.PresentationInfo.max_order,
  ARDOUR.TrackMode.Normal, false, false):front()
print("FG tracks", amb:n_inputs():n_audio(), amb:n_outputs():n_audio())

local plugin = ARDOUR.LuaAPI.new_plugin(s, "Fieldglass", ARDOUR.PluginType.VST3, "")
assert(not plugin:isnil(), "Fieldglass not found among the VST3 plugins")
assert(amb:add_processor_by_index(plugin, 0, nil, true) == 0, "insert the plugin")
local insert = plugin:to_insert()
print("FG plugin", plugin:active(), insert:input_streams():n_audio(), insert:output_streams():n_audio())

-- The dummy backend has 8 capture ports; inputs 9 to 16 take them again.
for i = 8, 15 do
  assert(amb:input():connect(amb:input():audio(i), "system:capture_" .. (i - 7), nil) == 0)
end
-- Amb's output feeds Out's input, channel for channel.
amb:output():disconnect_all(nil)
out:input():disconnect_all(nil)
for i = 0, 15 do
  assert(out:input():connect(out:input():audio(i), amb:output():audio(i):name(), nil) == 0)
end
-- No panning: channel n of a track's signal goes to its output n.
amb:panner_shell():set_bypassed(true)
out:panner_shell():set_bypassed(true)
amb:monitoring_control():set_value(ARDOUR.MonitorChoice.MonitorInput, PBD.GroupControlDisposition.NoGroup)
amb:rec_enable_control():set_value(1, PBD.GroupControlDisposition.NoGroup)
out:rec_enable_control():set_value(1, PBD.GroupControlDisposition.NoGroup)
s:maybe_enable_record(false)
s:request_roll(ARDOUR.TransportRequestSource.TRS_UI)
ARDOUR.LuaAPI.usleep(math.floor(seconds * 1000000))
print("FG rolling", s:transport_rolling(), s:actively_recording())
s:request_stop(false, false, ARDOUR.TransportRequestSource.TRS_UI)
ARDOUR.LuaAPI.usleep(1000000)
s:save_state("", false, false, false, false, false)
print("FG saved")
