//! The command line: commands, options and their help texts (clap).

use clap::{Args, Parser, Subcommand};
use std::path::PathBuf;

#[derive(Parser)]
#[command(
    name = "kicktrain",
    version,
    about = "Design and simulate laser pulse trains that align gas-phase molecules.",
    after_help = "Examples:\n  kicktrain molecules\n  kicktrain simulate examples/scenarios/nitrogen-one-pulse.json --out run1\n  kicktrain design --out best\n  kicktrain pendular OCS --intensity-wcm2 1e12 --static-kv-cm 20\n\n\
Exit codes: 0 done; 1 numerical limit (the run could not reach its accuracy); 2 bad input (one line naming the field);\n\
3 output could not be read or written; 4 stopped by SIGINT/SIGTERM, result so far written and marked partial\n\
(design, scan, tolerance); 130 stopped before anything could be written. --out folders appear whole or not at all.\n\n\
Lasers that align molecules are class 4: follow your laser safety officer and IEC 60825-1 / ANSI Z136.1."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
    /// Go on with runs whose estimated number of finite-pulse time steps exceeds solver.max_steps.
    #[arg(long, global = true)]
    pub allow_long: bool,
}

#[derive(Subcommand)]
pub enum Command {
    /// List the built-in molecules with their constants and sources.
    #[command(after_help = "Example:\n  kicktrain molecules\n  kicktrain molecules --json > molecules.json")]
    Molecules {
        /// Print the table as JSON (with every source).
        #[arg(long)]
        json: bool,
    },
    /// Search pulse timings and intensities for the best field-free alignment under the ceilings.
    #[command(after_help = "Examples:\n  kicktrain design                      # built-in example (two pulses, N2 at 300 K)\n  \
kicktrain design objectives/two-pulse-room-temperature.json --out best\n  \
kicktrain simulate best/design.json --out check   # replays the design\n\n\
--out DIR writes design.json, summary.json, trace.csv, design.svg, history.csv and convergence.svg.\n\
The search runs independent starts until three agree (see summary.json search.confidence) and warns when\n\
they do not; --effort thorough searches harder, --time-limit S bounds the time.\n\
Ctrl-C or SIGTERM stops the search and still reports (and writes) the best design found so far, exit code 4;\n\
a second signal quits at once (exit 130) and writes nothing.\n\n\
--shard K/N runs the independent starts i with i mod N = K of a fixed-count design (all of them, no early stop)\n\
and writes a part folder; `kicktrain merge` puts the parts' starts in order, finishes the search and writes\n\
the design one unsplit run with the same seed writes.")]
    Design(DesignArgs),
    /// Field-dressed (pendular) states in a constant laser intensity and static field: the adiabatic limit.
    #[command(allow_negative_numbers = true)]
    #[command(after_help = "Examples:\n  kicktrain pendular OCS --intensity-wcm2 1e12 --static-kv-cm 20 --temperature-k 1\n  \
kicktrain pendular SO2 --intensity-wcm2 1e11 --static-kv-cm 20 --temperature-k 0.5\n  \
kicktrain pendular OCS --intensity-wcm2 1e11 --static-kv-cm 20 --static-angle-deg 45 --temperature-k 1\n\n\
Energies exclude the isotropic polarizability shift, common to all states. For a top the table lists the\n\
thermally populated levels by name (\"J Ka Kc\" or \"J K\"), with ⟨cos²θ⟩ of the alignment axis and ⟨cosθ⟩\n\
of the dipole axis; each connects to the field-free level of the same rank in its exact symmetry class.\n\
With the static field at an angle (linear molecules), |M_f| is about the static field's axis and σ the\n\
state's class under the reflection through XZ; levels are followed through the static field first, then\n\
the laser.")]
    Pendular {
        /// Library molecule name: a linear molecule or a top (`kicktrain molecules` lists them).
        molecule: String,
        /// Cycle-averaged laser intensity, W/cm².
        #[arg(long, default_value_t = 0.0)]
        intensity_wcm2: f64,
        /// Static field strength, kV/cm.
        #[arg(long, default_value_t = 0.0)]
        static_kv_cm: f64,
        /// Angle of the static field from the laser polarization (Z) towards X, degrees (0: along Z).
        #[arg(long, default_value_t = 0.0)]
        static_angle_deg: f64,
        /// Temperature for the thermal adiabatic averages, K.
        #[arg(long, default_value_t = 1.0)]
        temperature_k: f64,
        /// List states connecting to field-free J up to this value.
        #[arg(long, default_value_t = 3)]
        j_max: u32,
        /// Print JSON instead of a table.
        #[arg(long)]
        json: bool,
    },
    /// Convert pulse energy, duration and focusing to peak power, waist, Rayleigh range and intensity.
    #[command(allow_negative_numbers = true)]
    #[command(after_help = "Examples:\n  kicktrain focus --energy-mj 2 --fwhm-fs 40 --waist-um 30\n  \
kicktrain focus --energy-mj 2 --fwhm-fs 40 --beam-radius-mm 5 --wavelength-nm 800 --focal-length-mm 300 --m2 1.2\n\n\
Gaussian beam: I0 = 2P/(πw0²), w0 = M²λf/(πw_in); peak power from the envelope area (0.9394 E/τ for Gaussian pulses).")]
    Focus {
        /// Pulse energy, mJ.
        #[arg(long)]
        energy_mj: f64,
        /// Intensity FWHM, fs.
        #[arg(long)]
        fwhm_fs: f64,
        /// Temporal shape: gaussian, sech2 or flat_top.
        #[arg(long, default_value = "gaussian")]
        shape: String,
        /// 1/e² intensity radius at the focus, µm.
        #[arg(long)]
        waist_um: Option<f64>,
        /// 1/e² intensity radius of the collimated beam on the lens, mm.
        #[arg(long)]
        beam_radius_mm: Option<f64>,
        /// Wavelength, nm.
        #[arg(long)]
        wavelength_nm: Option<f64>,
        /// Focal length, mm.
        #[arg(long)]
        focal_length_mm: Option<f64>,
        /// Beam quality factor M².
        #[arg(long, default_value_t = 1.0)]
        m2: f64,
        /// Compare the intensity with this library molecule's ionization estimate (default: every library molecule).
        #[arg(long)]
        molecule: Option<String>,
        /// Print the results as JSON (keys carry their units).
        #[arg(long)]
        json: bool,
    },
    /// Scan one or two numeric fields of a scenario (for example delay × intensity), in parallel.
    #[command(allow_negative_numbers = true)]
    #[command(
        after_help = "Examples:\n  kicktrain scan examples/scenarios/nitrogen-one-pulse.json --x pulses[0].peak_intensity_wcm2 --from 1e13 --to 8e13 --steps 15 --out scan1\n  \
kicktrain scan two-pulse.json --x pulses[1].center_ps --from 1 --to 9 --steps 40 --y pulses[1].peak_intensity_wcm2 --y-from 0 --y-to 5e13 --y-steps 40 --out scan2\n\n\
Reports the scenario's goal if it has one, else the peak ⟨cos²θ⟩ after the last pulse. Writes scan.csv and scan.svg (a line or a heatmap).\n\n\
Cost: every point is a whole run with the scenario's solver. With the default solver a 40 × 40 two-pulse scan of N2 at 300 K\n\
takes about a minute on two cores; with \"solver\": {\"method\": \"kick\"} (each pulse replaced by its impulsive kick) under a\n\
second. Use the kick model for first looks when every pulse is much shorter than the rotational period (about 100 fs or less\n\
for N2, whose period is 8.4 ps), then check the interesting region with the default solver."
    )]
    Scan(ScanArgs),
    /// Monte Carlo tolerance of a design (a scenario with a goal) to timing jitter and energy or phase noise.
    #[command(allow_negative_numbers = true)]
    #[command(after_help = "Example:\n  kicktrain tolerance best/design.json --jitter-fs 20 --energy-noise-percent 3 --samples 200 --out tol\n\n\
Jitter moves every pulse after the first; the probe stays at the nominal times. Writes tolerance.csv and tolerance.svg.")]
    Tolerance(ToleranceArgs),
    /// Merge the part folders of a scan, tolerance run, limits map or design split with --shard (for example the tasks of a Slurm array).
    #[command(after_help = "Example:\n  kicktrain merge run/parts/* --out run/result\n\n\
Checks that the parts come from one input and split, that none is missing, duplicated or stopped early (naming the\n\
command that reruns each such part), and only then writes the files one unsplit run writes (byte-identical CSV; a limits.csv\n\
differs only in its measured run times).")]
    Merge {
        /// Part folders (the --out folders of the runs with --shard).
        #[arg(required = true)]
        parts: Vec<PathBuf>,
        /// Output folder for the merged files.
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Write Slurm job-array scripts that run a scan, tolerance run or limits map in parts, and the merge job after them.
    #[command(subcommand_value_name = "JOB", subcommand_help_heading = "Jobs")]
    #[command(after_help = "Example:\n  kicktrain cluster scan two-pulse.json --x pulses[1].center_ps --from 1 --to 9 --steps 40 \\\n      \
--y pulses[1].peak_intensity_wcm2 --y-from 0 --y-to 5e13 --y-steps 40 --shards 64 --out run\n\n\
Times one point (draw, or search of a limits map) here first and asks Slurm for time and memory from it. Writes run/array.sbatch (one task per\n\
part, each writing run/parts/K), run/merge.sbatch (runs after every task succeeded and writes run/result) and a copy of\n\
the input, then prints the two sbatch commands. Nothing outside run/ is assumed shared but the kicktrain binary.")]
    Cluster(ClusterArgs),
    /// Map the best train per pulse count and intensity ceiling (and temperature or duration), with a bound no train can pass.
    #[command(allow_negative_numbers = true)]
    #[command(after_help = "Example:\n  kicktrain limits objectives/two-pulse-room-temperature.json --max-count 4 --ceilings 2e13,4e13,6e13 --out lim\n  \
kicktrain limits objectives/two-pulse-room-temperature.json --max-count 3 --ceilings 3e13,6e13 --temperatures 300,77 --waist-um 40 --out lim2\n\n\
Each (temperature or duration, ceiling) runs one design search over 1..=N pulses, in parallel. Writes limits.csv (one row per\n\
combination: score, pulses, how many independent starts agreed, run time) and limits.svg (score against the ceiling, one line per\n\
count, the bound of the largest count dashed). With --waist-um (or --beam-radius-mm, --wavelength-nm and --focal-length-mm), the\n\
ceilings are also given as pulse energies at that focus. Ctrl-C writes the combinations finished so far.")]
    Limits(LimitsArgs),
    /// Simulate one scenario file: alignment trace, summary and plot.
    #[command(after_help = "Example:\n  kicktrain simulate examples/scenarios/nitrogen-one-pulse.json --out run1\n\n\
The scenario is JSON: {\"molecule\": \"N2\", \"temperature_k\": 300,\n  \"pulses\": [{\"center_ps\": 0, \"fwhm_fs\": 50, \"peak_intensity_wcm2\": 5e13}],\n  \"window\": {\"start_ps\": 0.2, \"stop_ps\": 12, \"step_fs\": 20}}\n\
--out DIR writes summary.json, trace.csv (t_ps,cos2,cos2_2d, plus cos,cos3 with orienting fields) and alignment.svg.")]
    Simulate {
        /// Scenario file (JSON).
        scenario: PathBuf,
        /// Output folder for summary.json, trace.csv and alignment.svg.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Also print the summary as JSON to standard output.
        #[arg(long)]
        json: bool,
    },
}

/// The options of `kicktrain scan`.
#[derive(Args, Debug)]
pub struct ScanArgs {
    /// Scenario file (JSON).
    pub scenario: PathBuf,
    /// Path of the first scanned field, e.g. pulses[1].center_ps.
    #[arg(long)]
    pub x: String,
    /// First value of x.
    #[arg(long)]
    pub from: f64,
    /// Last value of x.
    #[arg(long)]
    pub to: f64,
    /// Number of x values.
    #[arg(long, default_value_t = 21)]
    pub steps: usize,
    /// Path of the second scanned field (2D scan).
    #[arg(long)]
    pub y: Option<String>,
    /// First value of y.
    #[arg(long)]
    pub y_from: Option<f64>,
    /// Last value of y.
    #[arg(long)]
    pub y_to: Option<f64>,
    /// Number of y values.
    #[arg(long, default_value_t = 21)]
    pub y_steps: usize,
    /// Output folder for scan.csv and scan.svg.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// No progress bar.
    #[arg(long)]
    pub quiet: bool,
    /// Run only part K of N (0 ≤ K < N) and write a part folder for `kicktrain merge`.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
}

/// The options of `kicktrain tolerance`.
#[derive(Args, Debug)]
pub struct ToleranceArgs {
    /// Scenario with a goal (e.g. a design.json).
    pub scenario: PathBuf,
    /// RMS timing jitter of each pulse after the first, fs.
    #[arg(long, default_value_t = 0.0)]
    pub jitter_fs: f64,
    /// RMS pulse-energy noise, percent.
    #[arg(long, default_value_t = 0.0)]
    pub energy_noise_percent: f64,
    /// RMS two-colour phase noise, rad.
    #[arg(long, default_value_t = 0.0)]
    pub phase_noise_rad: f64,
    /// Number of Monte Carlo samples.
    #[arg(long, default_value_t = 200)]
    pub samples: usize,
    /// Seed of the random draws.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Output folder for tolerance.csv and tolerance.svg.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Run only part K of N (0 ≤ K < N) and write a part folder for `kicktrain merge`.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
}

/// The options of `kicktrain cluster`.
#[derive(Args, Debug)]
pub struct ClusterArgs {
    /// The run to split.
    #[command(subcommand)]
    pub job: ClusterJob,
    /// Number of parts (array tasks).
    #[arg(long, global = true, default_value_t = 16)]
    pub shards: usize,
    /// Slurm partition for both jobs (passed through).
    #[arg(long, global = true)]
    pub partition: Option<String>,
    /// Slurm account for both jobs (passed through).
    #[arg(long, global = true)]
    pub account: Option<String>,
    /// CPUs per task.
    #[arg(long, global = true, default_value_t = 2)]
    pub cpus_per_task: usize,
}

/// The options of `kicktrain design`.
#[derive(Args, Debug)]
pub struct DesignArgs {
    /// Objective file (JSON); the built-in two-pulse example when omitted.
    pub objective: Option<PathBuf>,
    /// Output folder.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Seed for the search (overrides the file's search.seed).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Effort: quick, normal or thorough (overrides the file's search.effort).
    #[arg(long)]
    pub effort: Option<String>,
    /// After this many seconds the running start ends at its next iteration and no new start begins (overrides search.time_limit_s).
    #[arg(long, value_name = "S")]
    pub time_limit: Option<f64>,
    /// Run only part K of N of the independent starts (K from 0) and write a part folder for `kicktrain merge`.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
    /// No progress bar.
    #[arg(long)]
    pub quiet: bool,
    /// Print the summary as JSON to standard output.
    #[arg(long)]
    pub json: bool,
}

/// What `kicktrain cluster` splits.
#[derive(Subcommand, Debug)]
pub enum ClusterJob {
    /// A scan (same options as `kicktrain scan`; --out is the run folder).
    #[command(allow_negative_numbers = true)]
    Scan(ScanArgs),
    /// A tolerance run (same options as `kicktrain tolerance`; --out is the run folder).
    #[command(allow_negative_numbers = true)]
    Tolerance(ToleranceArgs),
    /// A limits map (same options as `kicktrain limits`; --out is the run folder).
    #[command(allow_negative_numbers = true)]
    Limits(LimitsArgs),
    /// The independent starts of a fixed-count design (same options as `kicktrain design`; --out is the run folder).
    Design(DesignArgs),
}

/// The options of `kicktrain limits`.
#[derive(Args, Debug)]
pub struct LimitsArgs {
    /// Objective file (JSON): molecule, goal, pulse bounds and search settings.
    pub objective: PathBuf,
    /// Largest pulse count (every count from 1 up is designed); default: the objective's.
    #[arg(long)]
    pub max_count: Option<usize>,
    /// Intensity ceilings per pulse, W/cm², comma-separated.
    #[arg(long, value_delimiter = ',', required = true)]
    pub ceilings: Vec<f64>,
    /// Temperatures, K, comma-separated (default: the objective's); one panel each.
    #[arg(long, value_delimiter = ',')]
    pub temperatures: Vec<f64>,
    /// Pulse durations (intensity FWHM), fs, comma-separated (default: the objective's bounds); one panel each.
    #[arg(long, value_delimiter = ',')]
    pub durations: Vec<f64>,
    /// 1/e² intensity radius at the focus, µm: report each ceiling as a pulse energy (default: the objective's focal_average.pump_waist_um).
    #[arg(long)]
    pub waist_um: Option<f64>,
    /// 1/e² radius of the collimated beam on the lens, mm (with --wavelength-nm and --focal-length-mm, instead of --waist-um).
    #[arg(long)]
    pub beam_radius_mm: Option<f64>,
    /// Wavelength, nm.
    #[arg(long)]
    pub wavelength_nm: Option<f64>,
    /// Focal length, mm.
    #[arg(long)]
    pub focal_length_mm: Option<f64>,
    /// Beam quality factor M².
    #[arg(long, default_value_t = 1.0)]
    pub m2: f64,
    /// Seed for the searches (overrides the file's search.seed).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Effort: quick, normal or thorough (overrides the file's search.effort).
    #[arg(long)]
    pub effort: Option<String>,
    /// Output folder for limits.csv and limits.svg.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// No progress bar.
    #[arg(long)]
    pub quiet: bool,
    /// Run only part K of N (0 ≤ K < N) of the (setting, ceiling) searches and write a part folder for `kicktrain merge`.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
}
