# tiny_model.sh — sourced by tests/cli/*.sh: train_tiny_model BIN CORPUS RUN_DIR trains a
# 3-stage x 16-code model in a few seconds (for plumbing tests; its quality is meaningless).
train_tiny_model() {
  "$1" train --out "$3" --corpus "$2" \
    --set model.channels=16 --set model.latent_dim=8 --set codebooks.stages=3 --set codebooks.codes=16 \
    --set codebooks.kmeans_init_batches=1 --set codebooks.kmeans_init_vectors=64 \
    --set train.segment_frames=64 --set train.batch_size=4 --set train.steps=20 --set train.warmup_steps=2 \
    --set train.validate_every=10 --set train.validation_segments=4 --set train.validation_share=0.3
}
