//! `icefield`: the Jupyter kernel and command-line tool of the icefield language.

mod bench;
mod connection;
mod dispatch;
mod install;
mod mime;
mod run;
mod server;
mod wire;

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{ArgGroup, Parser, Subcommand};
use icefield_lang::Interrupt;

#[derive(Parser)]
#[command(
    name = "icefield",
    version,
    about = "Spin-ice notebooks: the icefield Jupyter kernel and script runner"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run as a Jupyter kernel (started by Jupyter from the kernel spec).
    Kernel {
        /// The connection file Jupyter wrote for this kernel.
        #[arg(long = "connection-file", short = 'f', value_name = "FILE")]
        connection_file: PathBuf,
    },
    /// Install the kernel spec so Jupyter can start icefield.
    #[command(group(ArgGroup::new("target").args(["user", "sys_prefix", "prefix"])))]
    Install {
        /// Into the user's Jupyter data directory ($JUPYTER_DATA_DIR or ~/.local/share/jupyter); the default.
        #[arg(long)]
        user: bool,
        /// Into the active Python environment (sys.prefix/share/jupyter), e.g. a virtualenv.
        #[arg(long = "sys-prefix")]
        sys_prefix: bool,
        /// Into DIR/share/jupyter.
        #[arg(long, value_name = "DIR")]
        prefix: Option<PathBuf>,
        /// Kernel name (folder name under kernels/).
        #[arg(long, default_value = "icefield")]
        name: String,
    },
    /// Run an icefield script headless.
    Run {
        /// The script (NAME.ifld).
        file: PathBuf,
        /// Print one JSON record per result and line instead of plain text.
        #[arg(long)]
        json: bool,
        /// Write SVG figures into DIR (default: beside the script).
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
    },
    /// Run benchmark workloads and print their records.
    Bench {
        /// Benchmarks to run (all when none is named).
        names: Vec<String>,
        /// One JSON object per line.
        #[arg(long)]
        json: bool,
        /// List the benchmark names instead of running them.
        #[arg(long, conflicts_with_all = ["names", "json"])]
        list: bool,
    },
}

/// Ctrl-C (SIGINT) sets the interrupt flag; long runs poll it and stop at a safe point,
/// keeping what they computed. With `second_press_exits` (command-line runs), a second
/// Ctrl-C while the first is still pending ends the process at once (exit 130), for a
/// computation that has no safe point soon.
fn interrupt_on_ctrl_c(second_press_exits: bool) -> Interrupt {
    let interrupt = Interrupt::new();
    let flag = interrupt.clone();
    let handler = move || {
        if second_press_exits && flag.is_requested() {
            eprintln!("icefield: interrupted again; exiting");
            std::process::exit(run::EXIT_INTERRUPTED);
        }
        flag.request();
    };
    if let Err(e) = ctrlc::set_handler(handler) {
        eprintln!("icefield: cannot handle Ctrl-C ({e}); interrupting will end the process");
    }
    interrupt
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match cli.command {
        Command::Kernel { connection_file } => {
            let info = match connection::ConnectionInfo::from_file(&connection_file) {
                Ok(info) => info,
                Err(e) => {
                    eprintln!("icefield: {e}");
                    return ExitCode::from(2);
                }
            };
            match server::serve(&info, interrupt_on_ctrl_c(false)) {
                Ok(()) => ExitCode::SUCCESS,
                Err(e) => {
                    eprintln!("icefield: {e}");
                    ExitCode::FAILURE
                }
            }
        }
        Command::Install {
            user: _,
            sys_prefix,
            prefix,
            name,
        } => {
            let target = match (sys_prefix, prefix) {
                (true, _) => install::Target::SysPrefix,
                (false, Some(dir)) => install::Target::Prefix(dir),
                (false, None) => install::Target::User,
            };
            match install::install(&target, &name) {
                Ok(dir) => {
                    println!(
                        "installed the icefield kernel spec `{name}` in {}",
                        dir.display()
                    );
                    ExitCode::SUCCESS
                }
                Err(e) => {
                    eprintln!("icefield: {e}");
                    ExitCode::FAILURE
                }
            }
        }
        Command::Run { file, json, out } => {
            let interrupt = interrupt_on_ctrl_c(true);
            // Relative paths in a script (`import`, `export`) mean the script's folder, as
            // they mean the notebook's folder in a kernel Jupyter starts there.
            let file = std::path::absolute(&file).unwrap_or(file);
            let out = out.map(|dir| std::path::absolute(&dir).unwrap_or(dir));
            if let Some(folder) = file.parent().filter(|p| p.is_dir()) {
                if let Err(e) = std::env::set_current_dir(folder) {
                    eprintln!("icefield: cannot work in {}: {e}", folder.display());
                    return ExitCode::from(run::EXIT_ERROR as u8);
                }
            }
            let options = run::RunOptions {
                script: file,
                json,
                out_dir: out,
            };
            let mut session = icefield_lang::Session::new();
            let code = run::run_script(
                &mut session,
                &options,
                &interrupt,
                &mut std::io::stdout().lock(),
                &mut std::io::stderr().lock(),
            );
            ExitCode::from(code.clamp(0, 255) as u8)
        }
        Command::Bench { names, json, list } => {
            let interrupt = interrupt_on_ctrl_c(true);
            let mut stdout = std::io::stdout().lock();
            let result = if list {
                bench::list_stdlib(&mut stdout)
            } else {
                bench::run_stdlib(&names, json, &interrupt, &mut stdout)
            };
            match result {
                Ok(()) => ExitCode::SUCCESS,
                Err(e) => {
                    eprintln!("icefield bench: {e}");
                    ExitCode::FAILURE
                }
            }
        }
    }
}
