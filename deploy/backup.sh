#!/bin/sh
# Back up the database named by CONFIRM_DATABASE_URL into DIRECTORY, with the audit log's
# public key so that a restored copy can be checked (`deploy/restore.sh` does it).
#   SQLite:     sqlite3's online `.backup` (consistent while the service runs, WAL included)
#   PostgreSQL: pg_dump --format=custom (a consistent snapshot; restore with pg_restore)
# The signing key's private half is not copied: keep it in your secrets store (see
# docs/operations.md, "Key rotation").
#   usage: backup.sh DIRECTORY
set -eu
OUT="${1:?usage: backup.sh DIRECTORY}"
URL="${CONFIRM_DATABASE_URL:?set CONFIRM_DATABASE_URL}"
CLI="${CONFIRM_CLI:-confirm-service}"
mkdir -p "$OUT"
umask 077
case "$URL" in
    sqlite:///*)
        sqlite3 "${URL#sqlite:///}" ".backup '$OUT/confirm-service.db'"
        ;;
    postgresql*)
        pg_dump --format=custom --no-owner --file "$OUT/confirm-service.dump" \
            "postgresql://${URL#*://}"
        ;;
    *)
        echo "backup.sh: unsupported database URL" >&2
        exit 2
        ;;
esac
"$CLI" audit public-key > "$OUT/audit-public-key.pem" 2>/dev/null
date -u +%Y-%m-%dT%H:%M:%SZ > "$OUT/taken-at"
echo "backup written to $OUT" >&2
