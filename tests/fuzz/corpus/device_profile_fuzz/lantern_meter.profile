# Lantern LM-2 millivolt meter: an instrument invented for veq's
# documentation and tests (no such product exists), reached through a
# device profile. See docs/device-profiles.md for the format.
#
# Its dialect: commands and replies end in CR LF; the meter echoes every
# command before it answers; potentials in tenths of a millivolt, the
# sample temperature in tenths of a degree; it can send a reading on its own
# at a set interval, each line marked AUTO.
veq_profile 1
role potential_sensor
model "Lantern LM-2 millivolt meter"
command_end crlf
reply_end crlf
echo yes

error "ERROR {message:text}"

op identify
  send "MODEL?"
  reply "LANTERN LM-2 {serial_number:word} ELECTRODE {electrode:text}"

op read
  send "MEAS?"
  reply "MV {potential_mv:fix1} TEMP {temperature_c:fix1}"

op stream
  # 0 stops the readings.
  send "EVERY {interval_ms:int}"
  reply "OK"

unsolicited "AUTO MV {potential_mv:fix1} TEMP {temperature_c:fix1}"

op ping
  send "HELLO?"
  reply "OK"
