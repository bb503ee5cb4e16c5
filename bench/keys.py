"""Metadata key strings, in one place: SigMF core keys and rxbench's own extension namespace."""

# SigMF core (global)
DATATYPE = "core:datatype"
SAMPLE_RATE = "core:sample_rate"
VERSION = "core:version"
NUM_CHANNELS = "core:num_channels"
DESCRIPTION = "core:description"
RECORDER = "core:recorder"
HW = "core:hw"
EXTENSIONS = "core:extensions"
TRAILING_BYTES = "core:trailing_bytes"
DATASET = "core:dataset"
# SigMF core (capture segment)
SAMPLE_START = "core:sample_start"
FREQUENCY = "core:frequency"
DATETIME = "core:datetime"
HEADER_BYTES = "core:header_bytes"

#: rxbench's extension namespace, declared in ``core:extensions`` of every recording it writes.
#: Its keys are stored as ``rxbench:<name>``; in code (``Capture.extra``, ``SigmfWriter(extra=...)``)
#: they appear without the prefix, as the names below.
NAMESPACE = "rxbench"
NAMESPACE_VERSION = "0.1.0"

ROLE = "role"  # thru, dut, step, hot, cold, antenna or load
STEP = "step"  # the plan step's name
REPEAT = "repeat"  # 1-based repeat of the step
ATTENUATION_DB = "attenuation_db"  # step attenuator setting (nominal)
ATTENUATOR_TOLERANCE_DB = "attenuator_tolerance_db"  # its stated accuracy
SOURCE_SWR = "source_swr"  # SWR of what drives the DUT (generator, pads, attenuator)
LOAD_SWR = "load_swr"  # SWR of what the DUT drives (the dongle's input, with any pad)
DUT_SWR = "dut_swr"  # SWR of the device under test at its ports
SWRS = (SOURCE_SWR, LOAD_SWR, DUT_SWR)  # also the field names of a plan's [match] table
GAIN_DB = "gain_db"  # the dongle's fixed gain
PPM = "ppm"  # frequency correction applied
WITH_DUT = "with_dut"  # the DUT is in the path
DEVICES = "devices"  # identical devices in series (2: back-to-back pair)
DEVICE = "device"  # which device is in the path: the plan step's label (several devices compared)
GENERATOR_DBM = "generator_dbm"  # generator level (nominal)
TONE_OFFSET_HZ = "tone_offset_hz"  # tone minus centre frequency
ENR_DB = "enr_db"  # noise-source ENR at the centre frequency
U_ENR_DB = "u_enr_db"  # its standard uncertainty
DIRECT_SAMPLING = "direct_sampling"  # "i" or "q" when the tuner was bypassed
UPCONVERTER_HZ = "upconverter_hz"  # upconverter offset in front of the dongle
SIMULATED = "simulated"  # recorded from the simulated bench (invented data)
DROPPED_SAMPLES = "dropped_samples"  # samples lost while streaming
INCOMPLETE = "incomplete"  # an interrupted recording (kept as .partial)

#: The roles a capture can play in a session.
ROLES = ("thru", "dut", "step", "hot", "cold", "antenna", "load")
