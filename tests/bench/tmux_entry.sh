#!/bin/bash
# Type one reading into the TUI at 80x24 in tmux with keys 5 ms apart (a scanner or a very
# fast typist), units, a decimal comma, Enter/Down/Tab mixed; print the screen and the row
# stored. Expect: 10486.5|10.3|26.2|-2.5|21.5|50.0|372.317|2000.0|46|110.0|18/16/13|Fast Typist|...
# Needs tmux; builds the demo fleet first (logbook demo --no-ui).
set -e
rm -f /tmp/tm.db*
logbook demo --no-ui --db /tmp/tm.db --today 2026-12-01 >/dev/null
S=lbk_b_$$
tmux new-session -d -s $S -x 80 -y 24 "logbook --db /tmp/tm.db --as tmuxer --today 2026-12-01; sleep 30"
sleep 8
send() { local s="$1"; for ((i=0;i<${#s};i++)); do tmux send-keys -t $S -l -- "${s:$i:1}"; sleep 0.005; done; }
key() { tmux send-keys -t $S "$1"; sleep 0.005; }
send "B-19736"; key Enter; sleep 3; key r; sleep 3
send "10486.5"; key Tab; send "10,3"; key Enter; send "26.2"; key Down; send "-2.5"; key Tab; send "122F"; key Tab
send "5400psi"; key Tab; send "2000"; key Tab; key Tab; key Tab; send "21.5"; key Tab; send "18/16/13"; key Tab
key C-u; send "Fast Typist"; key Tab; send "abcde 5 ms apart"; key F2
sleep 4
tmux capture-pane -p -t $S
tmux send-keys -t $S Escape; sleep 1; tmux send-keys -t $S Escape; sleep 1; tmux send-keys -t $S q; sleep 2
tmux kill-session -t $S 2>/dev/null
sqlite3 /tmp/tm.db "select taken_on, machine_hours, case_drain_lpm, servo_pressure_bar, neutral_drift_bar, charge_pressure_bar, round(oil_temp_c,3), round(test_pressure_bar,3), test_speed_rpm, oil_grade, oil_vi, iso4406, technician, note from readings where serial='B-19736' order by id desc limit 1" 2>/dev/null || python -c "
import sqlite3; c=sqlite3.connect('/tmp/tm.db'); print(c.execute(\"select taken_on, machine_hours, case_drain_lpm, servo_pressure_bar, neutral_drift_bar, charge_pressure_bar, round(oil_temp_c,3), round(test_pressure_bar,3), test_speed_rpm, oil_grade, oil_vi, iso4406, technician, note from readings where serial='B-19736' order by id desc limit 1\").fetchone())"
