# cli_common.sh — sourced first by tests/cli/*.sh (it lives outside tests/cli/, so it is not
# a test itself):  . "$(dirname "$0")/../cli_common.sh" "$@"
# Sets strict mode, bin (the tessera binary, $1) and src (the source folder, $2), a scratch
# folder $work removed on exit, fail MESSAGE, and train_tiny_model.
set -euo pipefail
bin=$1
src=$2
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; exit 1; }

# train_tiny_model BIN CORPUS RUN_DIR [ARG...]: a 3-stage x 16-code model in a few seconds
# (for plumbing tests; its quality is meaningless). Extra arguments (--set k=v, --resume)
# follow the defaults, so they override them.
tiny_model_sets=(
  --set model.channels=16 --set model.latent_dim=8 --set codebooks.stages=3 --set codebooks.codes=16
  --set codebooks.kmeans_init_batches=1 --set codebooks.kmeans_init_vectors=64
  --set train.segment_frames=64 --set train.batch_size=4 --set train.steps=20 --set train.warmup_steps=2
  --set train.validate_every=10 --set train.validation_segments=4 --set train.validation_share=0.3)
train_tiny_model() {
  "$1" train --out "$3" --corpus "$2" "${tiny_model_sets[@]}" "${@:4}"
}
