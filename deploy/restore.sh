#!/bin/sh
# Restore a backup made by deploy/backup.sh into the database named by CONFIRM_DATABASE_URL
# (an empty SQLite path or an empty PostgreSQL database), then verify the whole audit log
# against the public key saved with the backup. Stop the service first.
#   usage: restore.sh DIRECTORY
set -eu
IN="${1:?usage: restore.sh DIRECTORY}"
URL="${CONFIRM_DATABASE_URL:?set CONFIRM_DATABASE_URL}"
CLI="${CONFIRM_CLI:-confirm-service}"
case "$URL" in
    sqlite:///*)
        TARGET="${URL#sqlite:///}"
        if [ -e "$TARGET" ]; then
            echo "restore.sh: $TARGET exists; move it away first" >&2
            exit 2
        fi
        mkdir -p "$(dirname "$TARGET")"
        sqlite3 "$TARGET" ".restore '$IN/confirm-service.db'"
        ;;
    postgresql*)
        pg_restore --no-owner --exit-on-error --dbname "postgresql://${URL#*://}" \
            "$IN/confirm-service.dump"
        ;;
    *)
        echo "restore.sh: unsupported database URL" >&2
        exit 2
        ;;
esac
"$CLI" db upgrade
"$CLI" audit verify --public-key "$IN/audit-public-key.pem"
