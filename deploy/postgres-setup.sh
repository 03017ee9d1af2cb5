#!/bin/sh
# Create the PostgreSQL role and database of the service, then apply the migrations.
# Run as a user that may create roles (e.g. `sudo -u postgres sh deploy/postgres-setup.sh`) on
# the database host; CONFIRM_DB_PASSWORD sets the role's password (omit it for peer or trust
# authentication on a local socket).
#   usage: postgres-setup.sh [ROLE] [DATABASE]   (defaults: confirm confirm)
set -eu
ROLE="${1:-confirm}"
DATABASE="${2:-confirm}"
PSQL="psql -v ON_ERROR_STOP=1 -X -q"

if ! $PSQL -tAc "SELECT 1 FROM pg_roles WHERE rolname = '$ROLE'" | grep -q 1; then
    $PSQL -c "CREATE ROLE \"$ROLE\" LOGIN"
fi
if [ -n "${CONFIRM_DB_PASSWORD:-}" ]; then
    $PSQL -c "ALTER ROLE \"$ROLE\" PASSWORD '$CONFIRM_DB_PASSWORD'"
fi
if ! $PSQL -tAc "SELECT 1 FROM pg_database WHERE datname = '$DATABASE'" | grep -q 1; then
    $PSQL -c "CREATE DATABASE \"$DATABASE\" OWNER \"$ROLE\" ENCODING 'UTF8' TEMPLATE template0"
fi
$PSQL -d "$DATABASE" -c "REVOKE ALL ON SCHEMA public FROM PUBLIC"
$PSQL -d "$DATABASE" -c "GRANT ALL ON SCHEMA public TO \"$ROLE\""
echo "role $ROLE and database $DATABASE ready; now, as the service user:" >&2
echo "  CONFIRM_DATABASE_URL=postgresql+psycopg://$ROLE@HOST/$DATABASE confirm-service db upgrade" >&2
