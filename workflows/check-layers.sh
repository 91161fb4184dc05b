#!/usr/bin/env bash
# Fails when a source or header includes a header of a higher layer, a sibling layer, or a
# library its layer must not use (STYLE.md: dependencies point one way; MPI only in the pipeline;
# cJSON and SQLite not in the numerical layers). Run from anywhere; prints every violation.
#
# Layers, lowest first (a file may include its own layer and lower ranks, never an equal rank of
# another layer):
#   0 base   1 model, result   2 kspace   3 symmetry   4 topology, surface   5 catalogue
#   6 pipeline, plot (figures: includes only base; PLplot lives here alone)   7 cli
# The layer of include/bandsieve/NAME.h is the folder of src/*/NAME.c, or the table below for the
# headers that have no source of their own.
set -euo pipefail
here="$(cd "$(dirname "$0")/.." && pwd)"
cd "$here"

declare -A rank=([base]=0 [model]=1 [result]=1 [kspace]=2 [symmetry]=3 [topology]=4 [surface]=4
                 [catalogue]=5 [pipeline]=6 [plot]=6 [cli]=7)
declare -A header_layer=([config]=base [pipeline]=pipeline)
# Layers whose code is numerics only: no cJSON, MPI or SQLite, and not the JSON form of a result.
numeric="model kspace symmetry topology surface"
# The one exception: the card reader parses JSON input, which is the model layer's own job.
json_input_ok="src/model/card.c"
# Orchestrators: headers that other modules of their own layer must not include either (the
# method modules return their own results; the orchestrator assembles them).
declare -A orchestrator=([diagnosis]=topology)
# Modules that sit above an orchestrator and may use it: the phase path diagnoses the members of a
# path one by one (it composes diagnoses, it is not a method the diagnosis calls).
above_orchestrator="phasepath"

status=0
fail() {
    echo "check-layers: $1" >&2
    status=1
}

layer_of_header() {
    local name="$1" found
    if [[ -n "${header_layer[$name]:-}" ]]; then
        echo "${header_layer[$name]}"
        return
    fi
    found=$(find src -mindepth 2 -maxdepth 2 -name "$name.c" | head -n 1)
    [[ -n "$found" ]] && basename "$(dirname "$found")"
}

# Every public header has a layer.
for h in include/bandsieve/*.h; do
    name=$(basename "$h" .h)
    l=$(layer_of_header "$name" || true)
    if [[ -z "$l" || -z "${rank[$l]:-}" ]]; then
        fail "$h: no layer (add src/<layer>/$name.c or an entry in header_layer)"
    fi
done

check_file() {
    local file="$1" layer="$2" line lineno inc target tl
    while IFS= read -r line; do
        lineno=${line%%:*}
        inc=${line#*:}
        if [[ "$inc" =~ \#[[:space:]]*include[[:space:]]*[\"\<]bandsieve/([A-Za-z0-9_]+)\.h[\"\>] ]]; then
            target=${BASH_REMATCH[1]}
            tl=$(layer_of_header "$target" || true)
            [[ -z "$tl" ]] && continue # reported above
            if [[ "$tl" != "$layer" && ${rank[$tl]} -ge ${rank[$layer]} ]]; then
                fail "$file:$lineno: $layer includes bandsieve/$target.h of layer $tl (rank ${rank[$tl]} >= ${rank[$layer]})"
            fi
            base="$(basename "$file" | sed 's/\.[ch]$//')"
            if [[ "${orchestrator[$target]:-}" == "$layer" && "$base" != "$target" && " $above_orchestrator " != *" $base "* ]]; then
                fail "$file:$lineno: includes bandsieve/$target.h, the orchestrator of its own layer"
            fi
            if [[ " $numeric " == *" $layer "* && "$target" == "result_json" ]]; then
                fail "$file:$lineno: numerical layer $layer includes the JSON form of the result"
            fi
        elif [[ "$inc" =~ \#[[:space:]]*include[[:space:]]*[\"\<](mpi\.h|cjson/cJSON\.h|sqlite3\.h)[\"\>] ]]; then
            target=${BASH_REMATCH[1]}
            if [[ " $numeric " == *" $layer "* ]]; then
                if [[ "$target" == "cjson/cJSON.h" && " $json_input_ok " == *" $file "* ]]; then continue; fi
                fail "$file:$lineno: numerical layer $layer includes <$target>"
            elif [[ "$target" == "mpi.h" && "$layer" != "pipeline" && "$layer" != "cli" ]]; then
                fail "$file:$lineno: MPI belongs to the pipeline, not to layer $layer"
            elif [[ "$target" == "sqlite3.h" && "$layer" != "catalogue" ]]; then
                fail "$file:$lineno: SQLite belongs to the catalogue, not to layer $layer"
            fi
        fi
    done < <(grep -n '^[[:space:]]*#[[:space:]]*include' "$file" || true)
}

for dir in src/*/; do
    layer=$(basename "$dir")
    if [[ -z "${rank[$layer]:-}" ]]; then
        fail "$dir: not a known layer (add it to the rank table of this script)"
        continue
    fi
    for f in "$dir"*.c "$dir"*.h; do
        [[ -e "$f" ]] && check_file "$f" "$layer"
    done
done
for h in include/bandsieve/*.h; do
    name=$(basename "$h" .h)
    l=$(layer_of_header "$name" || true)
    [[ -n "$l" && -n "${rank[$l]:-}" ]] && check_file "$h" "$l"
done

if [[ $status -eq 0 ]]; then echo "check-layers: ok"; fi
exit $status
