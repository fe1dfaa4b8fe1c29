#!/usr/bin/env bash
# Smoke test of the live screen in a real terminal: tmux runs `dbtrail watch --demo`, we
# wait for a reading and its ±, press the quit key, and check that the program exited with 0 and
# left the terminal in its normal (canonical, echoing) mode.
# Usage: tests/tui_smoke.sh PATH_TO_DBTRAIL
set -euo pipefail
bin=${1:?path to the dbtrail binary}
sock="dbtrail-smoke-$$"
tm() { tmux -L "$sock" "$@"; }
# Every wait below polls ten times a second, 30 s at most: generous for a loaded machine,
# and spent only when the test fails.
polls=300
logs=$(mktemp -d)
out=$(mktemp)
trap 'tm kill-server 2>/dev/null || true; rm -rf "$logs" "$out"' EXIT
# An earlier log, for the refusals and --append below: made flat out (--fast), since only
# its rows and shape matter, not the time they took.
"$bin" record --demo --fast --every 1s --duration 3s --out "$logs/earlier.csv" 2>/dev/null
earlier_rows=$(grep -vc '^#' "$logs/earlier.csv")

tm new-session -d -x 100 -y 30 "bash --norc --noprofile"
tm send-keys "PS1='ready> '" Enter
tm send-keys "'$bin' watch --demo tune; echo \"exit=\$?\" > '$out'; stty -a >> '$out'" Enter

# Waits until the screen matches the extended regular expression $1, or fails saying $2
# and showing the screen.
wait_for_screen() {
    for _ in $(seq 1 "$polls"); do
        if tm capture-pane -p | grep -Eq "$1"; then return 0; fi
        sleep 0.1
    done
    echo "$2"; tm capture-pane -p; exit 1
}

wait_for_screen "dBm  [●○]" "no reading appeared"
# The reading carries its uncertainty (k = 2) once its window has two counts or more.
wait_for_screen "±[0-9]+\.[0-9]{2} dB.* k = 2, about 95 %" "no ± beside the reading"

# Waits for the exit code and terminal modes the shell writes after watch ends, then
# checks the code was $1 and the terminal is back in canonical, echoing mode.
expect_exit_and_modes() {
    for _ in $(seq 1 "$polls"); do
        [ -s "$out" ] && grep -q "icanon" "$out" && break
        sleep 0.1
    done
    grep -q "^exit=$1$" "$out" || { echo "watch did not exit with $1 ($2):"; cat "$out"; exit 1; }
    grep -qw -- "-icanon" "$out" && { echo "terminal left in raw mode ($2)"; exit 1; }
    grep -qw "icanon" "$out" || { echo "no terminal modes recorded ($2)"; exit 1; }
    grep -qw "echo" "$out" || { echo "echo left off ($2)"; exit 1; }
}

# Esc on the readings does nothing: the screen is still there to open the log prompt,
# whose offered name is selected; Esc then cancels it.
# The next key waits until the hold line's clock has moved on, so that the terminal does
# not read Esc and it as one Alt chord.
held() { tm capture-pane -p | grep -Eo "for [0-9:]+" | head -1; }
before=$(held)
tm send-keys Escape
wait_for_screen "for [0-9:]+" "the screen went away after Esc"
for _ in $(seq 1 "$polls"); do [ "$(held)" != "$before" ] && break; sleep 0.1; done
[ "$(held)" != "$before" ] || { echo "the screen stopped after Esc:"; tm capture-pane -p; exit 1; }
tm send-keys l
wait_for_screen "log to file: dbtrail-" "Esc ended the screen, or l gave no prompt"
tm send-keys Escape
wait_for_screen "\? help · q quit" "Esc did not cancel the prompt"
# The l key refuses an existing file on the prompt line.
tm send-keys l
wait_for_screen "log to file: dbtrail-" "no log prompt"
tm send-keys "$logs/earlier.csv" Enter
wait_for_screen "earlier.csv already exists: give another name" "an existing log was not refused"
tm send-keys Escape
wait_for_screen "\? help · q quit" "Esc did not cancel the refused prompt"
tm send-keys q
expect_exit_and_modes 0 "quit key"
echo "tui smoke: reading shown, quit with 0, terminal restored"

# --log with --append adds to an existing log; while it is open q asks first, another key
# stays, and a second q quits with the log closed whole.
: > "$out"
tm send-keys "clear; '$bin' watch --demo tune --log '$logs/earlier.csv' --append; echo \"exit=\$?\" > '$out'; stty -a >> '$out'" Enter
wait_for_screen "log on, [1-9][0-9]* rows" "no rows logged with --append"
tm send-keys q
wait_for_screen "a log is open \([0-9]+ rows" "q did not ask while a log is open"
tm send-keys x
wait_for_screen "\? help · q quit" "another key did not stay"
tm send-keys q
wait_for_screen "q again quits and closes it" "q did not ask again"
tm send-keys q
expect_exit_and_modes 0 "second q"
grep -q "^# resumed" "$logs/earlier.csv" || { echo "no # resumed line:"; cat "$logs/earlier.csv"; exit 1; }
[ "$(grep -vc '^#' "$logs/earlier.csv")" -gt "$earlier_rows" ] || { echo "no rows added"; exit 1; }
echo "tui smoke: --log --append added to the log; q asked while it was open"

# A panic (injected by the test-only switch) must leave the terminal restored too: normal
# modes, the main screen back, and the panic's message readable.
: > "$out"
tm send-keys "clear; RUST_BACKTRACE=0 DBTRAIL_TEST_PANIC_AFTER_FRAMES=10 '$bin' watch --demo tune; echo \"exit=\$?\" > '$out'; stty -a >> '$out'" Enter
expect_exit_and_modes 101 "injected panic"
[ "$(tm display -p '#{alternate_on}')" = "0" ] || { echo "alternate screen left on after a panic"; exit 1; }
tm capture-pane -p -S -200 | grep -q "test-only panic after frame 10" || { echo "panic message not shown:"; tm capture-pane -p; exit 1; }
echo "tui smoke: injected panic exited 101 with the terminal restored and the message shown"
