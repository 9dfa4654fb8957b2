// Fingerprint of a dithered render, produced by the native build (cargo test --test native_checks) and required of
// the wasm build. Regenerate only when the chain's output is meant to change, and say why in the commit.
const GOLDEN_DITHERED_CHIME: u64 = 12226313655225046202;
const GOLDEN_EVERY_STAGE: u64 = 3212674085630304086;
