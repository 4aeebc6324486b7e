# Stonebridge PB-25 piston burette: an instrument invented for veq's
# documentation and tests (no such product exists), reached through a
# device profile. See docs/device-profiles.md for the format.
#
# Its dialect: short upper-case commands ending in CR; replies ending in
# CR LF; volumes in motor steps (2000 per mL: 50000 steps over 25 mL), rates
# in hundredths of a mL per minute, the bottle's content in tenths of a mL;
# single letters for states and codes for faults and refusals.
veq_profile 1
role burette
model "Stonebridge PB-25 piston burette"
command_end cr
reply_end crlf
reply_timeout_ms 1000

# What the burette does not report about itself.
fact cylinder_ml 25
fact steps_per_cylinder 50000
fact max_rate_ml_per_min 30
fact max_dose_ml 10
fact max_fill_rate_ml_per_min 50
fact ports 3

# Units on the wire: wire value = veq's value x factor.
scale volume_ml 2000
scale cylinder_ml 2000
scale delivered_ml 2000
scale rate_ml_per_min 100
scale reservoir_ml 10

# The instrument's words for veq's.
map state I idle
map state D dosing
map state F filling
map state X fault
map fault 0 none
map fault 1 empty
map fault 2 stalled
map fault 3 overload
map fault 4 host_silent
map last_stop C completed
map last_stop H host
map last_stop T time_limit
map last_stop W host_silence
map last_stop X fault
map reason 10 unknown_command
map reason 11 unreadable_request
map reason 12 bad_field
map reason 13 busy
map reason 14 over_limit
map reason 15 empty

# A refusal: NAK, a code, and words for people.
error "NAK {reason:int} {message:text}"

op identify
  send "WHO"
  reply "STONEBRIDGE PB-25 SN {serial_number:word}"

op dose
  # T is the burette's own time limit for the dose (ms).
  send "DV {volume_ml:int} R {rate_ml_per_min:int} T {limit_ms:int}"
  reply "ACK"

op fill
  send "FL R {rate_ml_per_min:int}"
  reply "ACK"

op status
  send "ST"
  reply "ST {state:word} C {cylinder_ml:int} D {delivered_ml:int} B {reservoir_ml:int} P {port:int} L {last_stop:word} E {fault:word}"

op stop
  # HALT answers only ACK: ask for the status to learn where it stopped.
  send "HALT"
  reply "ACK"
  then status

op valve
  send "PORT {port:int}"
  reply "ACK"

op reset_counter
  send "ZERO"
  reply "ACK"

op host_silence_limit
  # The burette's watchdog: it stops the piston after this much silence (ms).
  send "WD {ms:int}"
  reply "ACK"

op ping
  send "NOP"
  reply "ACK"
