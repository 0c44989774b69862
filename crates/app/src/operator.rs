//! Who is at the keyboard, for the audit trail of operator actions.

/// The local user's name (`$USER`, else `$LOGNAME`, else `unknown`).
pub fn local_user() -> String {
    std::env::var("USER")
        .or_else(|_| std::env::var("LOGNAME"))
        .unwrap_or_else(|_| "unknown".into())
}
