#!/bin/sh
# Create the broker's password file with one random password per account, and
# the controller's own copy for ventsup. Run as root on the broker host; hand
# each other password to its owner by a safe channel. See deploy/OPERATIONS.md.
set -eu

PASSWD=/etc/mosquitto/passwd
VENTSUP_COPY=${VENTSUP_COPY:-/etc/ventsup/mqtt-password}
USERS=${USERS:-"ventsup gateway-sensors gateway-actuators bms operator-alice viewer"}

umask 077
out=$(mktemp -d)
first=yes
for user in $USERS; do
    password=$(openssl rand -base64 24)
    if [ "$first" = yes ]; then
        mosquitto_passwd -c -b "$out/passwd" "$user" "$password"
        first=no
    else
        mosquitto_passwd -b "$out/passwd" "$user" "$password"
    fi
    printf '%s\n' "$password" > "$out/$user.password"
done

install -m 0640 -o root -g mosquitto "$out/passwd" "$PASSWD"
mkdir -p "$(dirname "$VENTSUP_COPY")"
install -m 0600 -o root -g root "$out/ventsup.password" "$VENTSUP_COPY"
echo "wrote $PASSWD and $VENTSUP_COPY; the other passwords are in $out (delete it when handed out)"
