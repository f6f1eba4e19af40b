// Command-key provisioning for the board crates, shared by their build
// scripts with `include!("../provision.rs")`.
//
// The key is the rig's own: a file of 64 hexadecimal digits (32 bytes),
// readable by its owner alone, named by the environment variable
// `HEATBOUND_KEY_FILE` at build time. Its path, never its contents, is what
// the build is told, and nothing here prints the key. The key goes into the
// image as a constant in `$OUT_DIR/command_key.rs`:
//
//     pub const COMMAND_KEY: Option<[u8; 32]> = Some([..]);
//
// Without the variable the image holds no key (`None`): the controller then
// accepts no command but a Hello request, and says so in its Hello and in
// every Reply. A real board never falls back to the public demo key.

/// Writes `$OUT_DIR/command_key.rs` from `HEATBOUND_KEY_FILE`, or fails
/// the build with a message that says what is wrong with the file.
fn provision_command_key() {
    println!("cargo:rerun-if-env-changed=HEATBOUND_KEY_FILE");
    let out = std::path::PathBuf::from(std::env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    let key = match std::env::var_os("HEATBOUND_KEY_FILE") {
        None => None,
        Some(path) => {
            let path = std::path::PathBuf::from(path);
            println!("cargo:rerun-if-changed={}", path.display());
            Some(read_key_file(&path).unwrap_or_else(|why| {
                panic!("HEATBOUND_KEY_FILE {}: {why}", path.display())
            }))
        }
    };
    let text = match key {
        None => "/// No command key was provisioned at build time.\npub const COMMAND_KEY: Option<[u8; 32]> = None;\n".to_string(),
        Some(bytes) => format!(
            "/// The rig's command key, from HEATBOUND_KEY_FILE at build time.\npub const COMMAND_KEY: Option<[u8; 32]> = Some({bytes:?});\n"
        ),
    };
    std::fs::write(out.join("command_key.rs"), text).expect("OUT_DIR is writable");
}

fn read_key_file(path: &std::path::Path) -> Result<[u8; 32], String> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let meta = std::fs::metadata(path).map_err(|e| format!("cannot read it ({e})"))?;
        let mode = meta.permissions().mode();
        if mode & 0o077 != 0 {
            return Err(format!(
                "the key file can be read by others (mode {:o}); run `chmod 600` on it first",
                mode & 0o777
            ));
        }
    }
    let text = std::fs::read_to_string(path).map_err(|e| format!("cannot read it ({e})"))?;
    let text = text.trim();
    if text.len() != 64 {
        return Err(format!(
            "a command key is 64 hexadecimal digits (32 bytes); this file holds {} characters",
            text.len()
        ));
    }
    let mut key = [0u8; 32];
    for (i, byte) in key.iter_mut().enumerate() {
        let pair = text.get(2 * i..2 * i + 2).ok_or("the key is not ASCII hexadecimal")?;
        *byte = u8::from_str_radix(pair, 16)
            .map_err(|_| format!("character {} of the key is not a hexadecimal digit", 2 * i))?;
    }
    Ok(key)
}
