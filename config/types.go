package config

import (
	"log/slog"
	"slices"
	"time"
)

// Enumerated values accepted by the configuration.
const (
	LossSquared  = "squared"  // squared loss ½(y − η)², linear models
	LossLogistic = "logistic" // logistic loss, y ∈ {0, 1}

	PenaltyLasso      = "lasso"       // α = 1
	PenaltyRidge      = "ridge"       // α = 0
	PenaltyElasticNet = "elastic-net" // 0 < α < 1, α given by mix

	RuleMin   = "min"    // lowest held-out loss
	RuleOneSE = "one-se" // largest λ within one standard error of the minimum

	LearnerSAGA  = "saga"  // windowed proximal SAGA
	LearnerDecay = "decay" // bufferless proximal AdaGrad / FTRL-style learner
	LearnerGram  = "gram"  // squared loss: the window's sufficient statistics, exact path by coordinate descent

	MissingImpute = "impute" // a missing feature takes the window mean
	MissingReject = "reject" // a record with a missing feature is rejected

	ThresholdFixed     = "fixed"     // alert when p ≥ value
	ThresholdFPR       = "fpr"       // tune to a held-out false-positive rate of target
	ThresholdPrecision = "precision" // tune to a held-out precision of target

	DriftADWIN       = "adwin"        // ADWIN on the test-then-train loss
	DriftPageHinkley = "page-hinkley" // Page-Hinkley on the test-then-train loss
	DriftOff         = "off"          // no performance drift detection

	LevelDebug = "debug"
	LevelInfo  = "info"
	LevelWarn  = "warn"
	LevelError = "error"

	FormatAuto = "auto" // text on a terminal, JSON otherwise
	FormatText = "text"
	FormatJSON = "json"

	IntakeAuto    = "auto"    // durable where JetStream answers, core otherwise
	IntakeDurable = "durable" // every model reads its own JetStream stream from its checkpoint's position
	IntakeCore    = "core"    // plain subscriptions: at most once
)

// Config is the whole configuration file. A Config returned by [Parse] or
// [Load] has every default filled in and has been validated.
type Config struct {
	// NATS is the message bus: embedded (the default) or external.
	NATS NATS `yaml:"nats"`
	// HTTP is the HTTP API and status page.
	HTTP HTTP `yaml:"http"`
	// SubjectPrefix prefixes every subject lariat publishes on:
	// <prefix>.model.<name>, <prefix>.alert.<name>, <prefix>.reject.<name>.
	// Default "lariat". NATS subject tokens, no wildcards.
	SubjectPrefix string `yaml:"subject_prefix"`
	// DataDir holds the embedded JetStream store and persisted runtime
	// state. Default "./lariat-data", relative to the working directory.
	DataDir string `yaml:"data_dir"`
	// Log configures the process log.
	Log Log `yaml:"log"`
	// Intake sets how records reach the models: from JetStream streams
	// (durable) or plain subscriptions (core).
	Intake Intake `yaml:"intake"`
	// Checkpoint sets how often each model's state is saved under
	// DataDir/checkpoints.
	Checkpoint Checkpoint `yaml:"checkpoint"`
	// Models are the models to keep current; at least one.
	Models []Model `yaml:"models"`

	src *source // where the config came from (file name, lines); nil if built in code
}

// NATS configures the connection to the message bus. With URL empty lariat
// starts an embedded nats-server in-process (JetStream on) on Listen; the
// authentication and TLS settings apply only to an external server.
type NATS struct {
	// URL of an external server: nats:// or tls://, several separated by
	// commas. Default "" (start an embedded server).
	URL string `yaml:"url"`
	// Listen is the embedded server's address, loopback only; port 0 or -1
	// picks a random port. Default "127.0.0.1:4222". Ignored when URL is set.
	Listen string `yaml:"listen"`
	// User name for user/password authentication. Default "".
	User string `yaml:"user"`
	// Password, literal. At most one of Password, PasswordFile and
	// PasswordEnv may be set. Default "".
	Password Secret `yaml:"password"`
	// PasswordFile is a file holding the password. Default "".
	PasswordFile string `yaml:"password_file"`
	// PasswordEnv names an environment variable holding the password. Default "".
	PasswordEnv string `yaml:"password_env"`
	// Token for token authentication, literal. At most one of Token,
	// TokenFile and TokenEnv may be set. Default "".
	Token Secret `yaml:"token"`
	// TokenFile is a file holding the token. Default "".
	TokenFile string `yaml:"token_file"`
	// TokenEnv names an environment variable holding the token. Default "".
	TokenEnv string `yaml:"token_env"`
	// CredentialsFile is a .creds file (JWT + NKey seed). Default "".
	CredentialsFile string `yaml:"credentials_file"`
	// NKeyFile is an NKey seed file. Default "".
	NKeyFile string `yaml:"nkey_file"`
	// TLS configures client TLS to an external server.
	TLS TLS `yaml:"tls"`
	// PendingMsgs is the per-subscription pending message limit (slow
	// consumer guard). Default 1048576.
	PendingMsgs int `yaml:"pending_msgs"`
	// PendingBytes is the per-subscription pending byte limit. Default
	// 268435456 (256 MiB); at least 1 MiB.
	PendingBytes int `yaml:"pending_bytes"`
}

// TLS names the files for client TLS. A certificate needs its key and the
// key its certificate; the CA file may stand alone. Defaults "".
type TLS struct {
	// CAFile is a PEM bundle of CAs to verify the server with.
	CAFile string `yaml:"ca_file"`
	// CertFile is the PEM client certificate.
	CertFile string `yaml:"cert_file"`
	// KeyFile is the PEM private key of CertFile.
	KeyFile string `yaml:"key_file"`
}

// Enabled reports whether any TLS file is set.
func (t TLS) Enabled() bool { return t.CAFile != "" || t.CertFile != "" || t.KeyFile != "" }

// HTTP configures the HTTP API and status page.
type HTTP struct {
	// Listen is the host:port to serve on. Default "127.0.0.1:8080".
	Listen string `yaml:"listen"`
	// AdminTokenFile is a file holding the bearer token required for
	// state-changing calls. At most one of AdminTokenFile and AdminTokenEnv.
	// With neither, state-changing calls are disabled. Default "".
	AdminTokenFile string `yaml:"admin_token_file"`
	// AdminTokenEnv names an environment variable holding the admin token.
	// Default "".
	AdminTokenEnv string `yaml:"admin_token_env"`
	// MaxBodyBytes caps a request body. Default 1048576 (1 MiB); allowed
	// 1 KiB to 1 GiB.
	MaxBodyBytes int64 `yaml:"max_body_bytes"`
}

// Intake sets how records reach the models. In durable mode each model's
// subject is captured by a JetStream stream of its own, named
// <stream_prefix>_<model>, which lariat creates (or updates) with the
// retention below; the model reads it from the position its checkpoint has
// applied, so records published while lariat is down are applied when it
// comes back, and none twice. In core mode lariat subscribes with plain
// NATS: a record published while it is down, or dropped by a slow
// subscription, is lost (at most once; the drops it can see are counted).
type Intake struct {
	// Mode is auto, durable or core. auto is durable when the server
	// answers JetStream requests (the embedded server always does) and core
	// otherwise. durable fails to start without JetStream. Default "auto".
	Mode string `yaml:"mode"`
	// StreamPrefix names the streams: <stream_prefix>_<model>. Letters,
	// digits, '_' and '-'. Default "lariat".
	StreamPrefix string `yaml:"stream_prefix"`
	// MaxAge discards records older than this from a stream, at least ten
	// times checkpoint.interval and at least 1m, so a restart finds every
	// record after its checkpoint. Default 72h.
	MaxAge Duration `yaml:"max_age"`
	// MaxBytes caps a stream's size (the oldest records go first), at least
	// 1 MiB. Default 1073741824 (1 GiB).
	MaxBytes int64 `yaml:"max_bytes"`
}

// Checkpoint sets when each model's whole state is saved: after every
// Records applied records or Interval, whichever comes first, and at
// shutdown. The newest two checkpoints of each model are kept.
type Checkpoint struct {
	// Records saves after this many records since the last save, 1 to
	// 10000000. Default 100000 (about 1 s of replay after a crash at
	// the daemon's durable throughput; a save costs about 10 ms at d = 64).
	Records int `yaml:"records"`
	// Interval saves at least this often while records arrive, 1s to 1h.
	// Default 30s.
	Interval Duration `yaml:"interval"`
	// Store is where checkpoints live: dir (data_dir/checkpoints, this
	// process only) or bucket (a JetStream object store every lariat
	// process on the NATS system can read, so another process can take a
	// model over). Default "dir".
	Store string `yaml:"store"`
	// Bucket names the object store of Store bucket: letters, digits, '_'
	// or '-'. Default "lariat_checkpoints".
	Bucket string `yaml:"bucket"`
	// Replicas is how many servers hold the bucket, 1..5 (3 on a
	// three-node cluster). Default 1.
	Replicas int `yaml:"replicas"`
}

// Checkpoint stores.
const (
	CheckpointDir    = "dir"    // data_dir/checkpoints
	CheckpointBucket = "bucket" // a JetStream object store
)

// Log configures the process log.
type Log struct {
	// Level is debug, info, warn or error. Default "info".
	Level string `yaml:"level"`
	// Format is auto (text on a terminal, JSON otherwise), text or json.
	// Default "auto".
	Format string `yaml:"format"`
}

// SlogLevel returns Level as a [slog.Level] (info for anything unknown).
func (l Log) SlogLevel() slog.Level {
	switch l.Level {
	case LevelDebug:
		return slog.LevelDebug
	case LevelWarn:
		return slog.LevelWarn
	case LevelError:
		return slog.LevelError
	}
	return slog.LevelInfo
}

// Model configures one model kept current on one stream of labeled records.
type Model struct {
	// Name identifies the model in subjects, URLs and metrics:
	// [a-z0-9][a-z0-9_-]*, at most 64 bytes, unique. Required.
	Name string `yaml:"name"`
	// Subject carries the labeled records; a NATS subject, wildcards * and >
	// allowed. Required.
	Subject string `yaml:"subject"`
	// ScoreSubject optionally carries unlabeled records to score against
	// the alert threshold; logistic models only. Default "".
	ScoreSubject string `yaml:"score_subject"`
	// Loss is squared or logistic. Default "squared".
	Loss string `yaml:"loss"`
	// Penalty is lasso, ridge or elastic-net. Default "lasso".
	Penalty string `yaml:"penalty"`
	// Mix is the elastic-net mixing α in (0,1), required for elastic-net;
	// it must stay 0 for lasso and ridge. Default 0 (unset).
	Mix float64 `yaml:"mix"`
	// Lambda > 0 fixes λ: one learner, no ladder, no retuning. Default 0,
	// which means "choose λ on held-out data with the ladder", never λ = 0:
	// the daemon fits no unpenalized model (lariat fit --lambda 0 does).
	Lambda float64 `yaml:"lambda"`
	// Ladder is the λ grid.
	Ladder Ladder `yaml:"ladder"`
	// Window bounds the training window.
	Window Window `yaml:"window"`
	// Holdout sets the held-out split.
	Holdout Holdout `yaml:"holdout"`
	// Retune sets how λ is chosen on held-out data.
	Retune Retune `yaml:"retune"`
	// Learner chooses the optimizer.
	Learner Learner `yaml:"learner"`
	// Publish sets when the model is published.
	Publish Publish `yaml:"publish"`
	// Features optionally fixes the feature order (enables the "v" array
	// record form): unique, non-empty names. Default none.
	Features []string `yaml:"features"`
	// MaxFeatures caps the feature set (Features plus names learned from
	// records); at least len(Features), at most 100000. Default 256. The
	// model is as wide as the names in use, not as the cap; a learned name
	// unseen for a whole window frees its slot, and a new name past the cap
	// is dropped (or, with Missing "reject", rejects its record).
	MaxFeatures int `yaml:"max_features"`
	// Missing is impute (window mean) or reject. Default "impute".
	Missing string `yaml:"missing"`
	// Queue is the bounded queue length between the bus and the model
	// goroutine, 1 to 1<<20. Default 4096.
	Queue int `yaml:"queue"`
	// TimeSkew rejects a record whose "t" is further than this ahead of the
	// wall clock (reason "time"), so one record with a wrong clock cannot
	// empty a time-span window or stall a cooldown; 0 accepts any time.
	// 0s to 24h. Default 5m.
	TimeSkew Duration `yaml:"time_skew"`
	// Threshold is the alert threshold; logistic models only (a squared
	// model must leave it at its defaults).
	Threshold Threshold `yaml:"threshold"`
	// Drift sets the drift alerts.
	Drift Drift `yaml:"drift"`
	// Guard sets the plausibility checks (configured bounds and the
	// standard-deviation guard).
	Guard Guard `yaml:"guard"`

	// Instances makes the entry a template: one model per distinct key
	// found in a wildcard token of Subject (see [Instances]).
	Instances Instances `yaml:"instances"`
}

// Instances turns a model entry into a template. With KeyToken > 0 the
// token at that position of Subject (counted from 1) must be "*"; the
// value a record's subject has there is its instance key, and each
// distinct key gets a model of its own, named <name>.<key>, created on its
// first record from the template's settings. A key must match
// [A-Za-z0-9][A-Za-z0-9_-]* and be at most 64 bytes (else the record is
// rejected with reason "key").
type Instances struct {
	// KeyToken is the 1-based position of the subject token that holds
	// the instance key; 0 (the default) is an ordinary model.
	KeyToken int `yaml:"key_token"`
	// Max caps the distinct keys of the template, 1..1000000; a record
	// of a new key past it is rejected with reason "instances". Default
	// 10000.
	Max int `yaml:"max"`
	// Idle unloads an instance that has had no record for this long,
	// after a checkpoint; its next record loads it back from that
	// checkpoint. 0s never unloads. Default 1h.
	Idle Duration `yaml:"idle"`
	// Partitions splits the template's keys into this many partitions,
	// 1..1024, with the NATS server's subject-mapping partition function;
	// each partition is applied by one lariat process at a time, and the
	// processes running the template share the partitions. 1 (the default)
	// is one reader of every key in this process. More than 1 needs
	// checkpoint.store bucket and durable intake.
	Partitions int `yaml:"partitions"`
	// Takeover is how long a process that stopped reading (dead, or cut
	// off from NATS) keeps its partitions before another takes them over,
	// 1s..5m (Partitions > 1). Default 5s.
	Takeover Duration `yaml:"takeover"`
}

// Template reports whether the model entry is a template (KeyToken > 0).
func (m Model) Template() bool { return m.Instances.KeyToken > 0 }

// Ladder is the grid of λ values, log-spaced from λ_max down to Floor·λ_max
// for lasso and elastic net, and for ridge between the λ where its effective
// degrees of freedom are 0.5 and rank − 0.5; either grid moves further down
// while the held-out minimum sits at its smallest λ (online.Ladder.Extend).
type Ladder struct {
	// Size is the number of λ values, 1 to 100. Default 12.
	Size int `yaml:"size"`
	// Floor is the smallest λ of the anchored grid as a fraction of λ_max,
	// in (0,1), for lasso and elastic net (ridge does not use it). Default
	// 0.001.
	Floor float64 `yaml:"floor"`
}

// Window bounds the training window by count and, optionally, time.
type Window struct {
	// Records caps the records in the window, 10 to 10000000. The cap
	// always applies, with or without Span. Default 10000.
	Records int `yaml:"records"`
	// Span, when > 0, also evicts records older than the newest record's
	// time minus Span. A record's own time is its "t"; a record without
	// one takes the newest time seen, and a far-past or out-of-order time
	// evicts nothing (a time too far ahead is refused, see TimeSkew).
	// Default 0 (no time limit).
	Span Duration `yaml:"span"`
}

// Holdout sets the deterministic held-out split.
type Holdout struct {
	// Every holds out every k-th record (k ≥ 2). 0 turns the holdout off,
	// which is allowed only with a fixed λ (lambda > 0) and threshold mode
	// fixed, since choosing λ or tuning the threshold needs held-out data.
	// 1 is not allowed (nothing would train). Default 5.
	Every int `yaml:"every"`
	// Records caps the held-out ring, 10 to 10000000. Default 2000.
	Records int `yaml:"records"`
	// ByKey splits by a hash of the record key instead of its sequence
	// number. Default false.
	ByKey bool `yaml:"by_key"`
}

// Retune sets how often and how λ is chosen.
type Retune struct {
	// Every rescores the ladder every this many records, ≥ 1. Default 500.
	Every int `yaml:"every"`
	// Rule is min or one-se. Default "one-se".
	Rule string `yaml:"rule"`
}

// EffectiveKind returns the learner a model with loss runs: Kind when set,
// else gram for the squared loss and saga for any other.
func (l Learner) EffectiveKind(loss string) string {
	switch {
	case l.Kind != "":
		return l.Kind
	case loss == LossSquared:
		return LearnerGram
	}
	return LearnerSAGA
}

// Learner chooses and tunes the optimizer.
type Learner struct {
	// Kind is gram (squared loss only), saga or decay. Default "" (unset):
	// gram for the squared loss, saga for the logistic (EffectiveKind).
	Kind string `yaml:"kind"`
	// Steps is the stochastic steps per arriving record per ladder member,
	// 1 to 64 (saga and decay; gram takes no steps). Default 2.
	Steps int `yaml:"steps"`
	// IdleSteps is the extra steps per member when the stream is quiet,
	// 0 to 1048576; for gram, any value above 0 lets a quiet stream solve
	// its members on the current window. Default 64.
	IdleSteps int `yaml:"idle_steps"`
	// HalfLife is the decay learner's forgetting half-life in records, > 0;
	// ignored by saga. Default 10000.
	HalfLife float64 `yaml:"half_life"`
}

// Publish sets when the current model is published.
type Publish struct {
	// Heartbeat republishes an unchanged model this often, ≥ 1s. Default 30s.
	Heartbeat Duration `yaml:"heartbeat"`
	// Tolerance is the coefficient change (standardized scale) below which
	// the model counts as unchanged, ≥ 0. Default 0.001.
	Tolerance float64 `yaml:"tolerance"`
}

// Threshold is the alert threshold of a logistic model.
type Threshold struct {
	// Mode is fixed, fpr or precision. Default "fixed".
	Mode string `yaml:"mode"`
	// Value is the threshold on p in (0,1) for mode fixed, and the starting
	// threshold until the first tuning for the other modes. Default 0.5.
	Value float64 `yaml:"value"`
	// Target is the held-out false-positive rate (fpr) or precision
	// (precision) to tune to, in (0,1); unused by fixed. Default 0.01.
	Target float64 `yaml:"target"`
}

// Drift sets the drift alerts.
type Drift struct {
	// Performance is adwin, page-hinkley or off. Default "adwin".
	Performance string `yaml:"performance"`
	// Delta is ADWIN's confidence δ, or Page-Hinkley's tolerated magnitude
	// of change, in (0,1). Default 0.002.
	Delta float64 `yaml:"delta"`
	// PSI is the per-feature population stability index alert threshold,
	// > 0. Default 0.25.
	PSI float64 `yaml:"psi"`
	// MeanShift is the standardized mean-shift alert threshold, > 0.
	// Default 3.
	MeanShift float64 `yaml:"mean_shift"`
	// Cooldown suppresses repeats of an alert kind per model, ≥ 0.
	// Default 10m.
	Cooldown Duration `yaml:"cooldown"`
	// Adapt shrinks the window to the post-change records after a
	// confirmed drift. Default true.
	Adapt bool `yaml:"adapt"`
}

// Default returns a Config with every top-level default and no models; it
// does not validate until at least one model is added.
func Default() *Config {
	return &Config{
		NATS: NATS{
			Listen:       "127.0.0.1:4222",
			PendingMsgs:  1 << 20,
			PendingBytes: 256 << 20,
		},
		HTTP: HTTP{
			Listen:       "127.0.0.1:8080",
			MaxBodyBytes: 1 << 20,
		},
		SubjectPrefix: "lariat",
		DataDir:       "./lariat-data",
		Log:           Log{Level: LevelInfo, Format: FormatAuto},
		Intake: Intake{
			Mode:         IntakeAuto,
			StreamPrefix: "lariat",
			MaxAge:       Duration(72 * time.Hour),
			MaxBytes:     1 << 30,
		},
		Checkpoint: Checkpoint{Records: 100000, Interval: Duration(30 * time.Second),
			Store: CheckpointDir, Bucket: "lariat_checkpoints", Replicas: 1},
	}
}

// DefaultModel returns a Model with every default; Name and Subject are
// empty and must be set.
func DefaultModel() Model {
	return Model{
		Loss:        LossSquared,
		Penalty:     PenaltyLasso,
		Ladder:      Ladder{Size: 12, Floor: 0.001},
		Window:      Window{Records: 10000},
		Holdout:     Holdout{Every: 5, Records: 2000},
		Retune:      Retune{Every: 500, Rule: RuleOneSE},
		Learner:     Learner{Steps: 2, IdleSteps: 64, HalfLife: 10000},
		Publish:     Publish{Heartbeat: Duration(30 * time.Second), Tolerance: 0.001},
		MaxFeatures: 256,
		Missing:     MissingImpute,
		Queue:       4096,
		TimeSkew:    Duration(5 * time.Minute),
		Threshold:   defaultThreshold,
		Drift: Drift{
			Performance: DriftADWIN,
			Delta:       0.002,
			PSI:         0.25,
			MeanShift:   3,
			Cooldown:    Duration(10 * time.Minute),
			Adapt:       true,
		},
		Guard:     defaultGuard(),
		Instances: Instances{Max: 10000, Idle: Duration(time.Hour), Partitions: 1, Takeover: Duration(5 * time.Second)},
	}
}

var defaultThreshold = Threshold{Mode: ThresholdFixed, Value: 0.5, Target: 0.01}

// Logistic reports whether the model uses the logistic loss.
func (m Model) Logistic() bool { return m.Loss == LossLogistic }

// PenaltyMix returns the penalty's mixing α: 1 for lasso, 0 for ridge,
// Mix for elastic-net.
func (m Model) PenaltyMix() float64 {
	switch m.Penalty {
	case PenaltyRidge:
		return 0
	case PenaltyElasticNet:
		return m.Mix
	}
	return 1
}

// FixedLambda reports whether λ is fixed (Lambda > 0): no ladder, no retuning.
func (m Model) FixedLambda() bool { return m.Lambda > 0 }

// HoldoutOff reports whether the held-out split is turned off (Holdout.Every == 0).
func (m Model) HoldoutOff() bool { return m.Holdout.Every == 0 }

// Model returns the model called name.
func (c *Config) Model(name string) (*Model, bool) {
	i := slices.IndexFunc(c.Models, func(m Model) bool { return m.Name == name })
	if i < 0 {
		return nil, false
	}
	return &c.Models[i], true
}
