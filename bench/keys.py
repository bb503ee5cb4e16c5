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
# SigMF core (capture segment)
SAMPLE_START = "core:sample_start"
FREQUENCY = "core:frequency"
DATETIME = "core:datetime"

#: rxbench's extension namespace, declared in ``core:extensions`` of every recording it writes.
NAMESPACE = "rxbench"
NAMESPACE_VERSION = "0.1.0"
ROLE = "rxbench:role"
ATTENUATION_DB = "rxbench:attenuation_db"
GAIN_DB = "rxbench:gain_db"
STEP = "rxbench:step"
GENERATOR_DBM = "rxbench:generator_dbm"
ENR_DB = "rxbench:enr_db"
INCOMPLETE = "rxbench:incomplete"
DROPPED_SAMPLES = "rxbench:dropped_samples"
PPM = "rxbench:ppm"
SIMULATED = "rxbench:simulated"

#: The roles a capture can play in a session.
ROLES = ("thru", "dut", "step", "hot", "cold", "antenna", "load")
