//! Property tests that try the same cases on every run.
//!
//! `proptest!` draws fresh cases from the operating system on each run, so a rare failing corner
//! can turn one CI run red and the next green, and nobody can replay it without the printed input.
//! `fixed_proptest!` takes the same blocks (an optional `#![proptest_config(..)]`, then test
//! functions with `name in strategy` arguments) and runs them through proptest's own runner with
//! its deterministic generator (`TestRng::deterministic_rng`): every run tries the same cases and
//! shrinks a failure to the same minimal input. Searching wider is a deliberate change of `cases`.

/// `proptest!` with proptest's deterministic case generator (see the module doc).
macro_rules! fixed_proptest {
    (#![proptest_config($config:expr)] $($tests:tt)*) => {
        fixed_proptest!(@config ($config) $($tests)*);
    };
    (@config ($config:expr)
     $( $(#[$meta:meta])* fn $name:ident ( $($arg:pat in $strategy:expr),+ $(,)? ) $body:block )*) => {
        $(
            $(#[$meta])*
            fn $name() {
                let config: ::proptest::test_runner::Config = $config;
                let algorithm = config.rng_algorithm;
                let mut runner = ::proptest::test_runner::TestRunner::new_with_rng(
                    config,
                    ::proptest::test_runner::TestRng::deterministic_rng(algorithm),
                );
                let outcome = runner.run(&($($strategy,)+), |($($arg,)+)| {
                    $body;
                    Ok(())
                });
                if let Err(error) = outcome {
                    panic!(
                        "{}: {error}\n(inputs in the order {}; {runner})",
                        stringify!($name),
                        stringify!($($arg),+),
                    );
                }
            }
        )*
    };
    (@config $($unmatched:tt)*) => {
        compile_error!(concat!("fixed_proptest!: expected test functions with `name in strategy` arguments, got: ", stringify!($($unmatched)*)));
    };
    ($($tests:tt)*) => {
        fixed_proptest!(@config (::proptest::test_runner::Config::default()) $($tests)*);
    };
}
