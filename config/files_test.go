package config

import (
	"errors"
	"path/filepath"
	"strings"
	"testing"
)

// badFiles lists, for every testdata/*.bad.yaml, the problems it must
// produce, in order: each entry must be a substring of the matching line of
// the error, and there must be no other problem.
var badFiles = map[string][]string{
	"unknown_key.bad.yaml": {
		`unknown_key.bad.yaml:3: nats.lisen: unknown field; did you mean "listen"? (allowed: url, listen,`,
		`unknown_key.bad.yaml:7: models[0].learnr: unknown field; did you mean "learner"?`,
		`unknown_key.bad.yaml:8: models[0].ladder.flor: unknown field; did you mean "floor"? (allowed: size, floor)`,
	},
	"type_error.bad.yaml": {
		`type_error.bad.yaml:4: models[0].queue: expected an integer, got "lots"`,
		`type_error.bad.yaml:5: models[0].lambda: expected a number, got "high"`,
		`type_error.bad.yaml:6: models[0].ladder.size: expected an integer, got 2.5`,
		`type_error.bad.yaml:7: models[0].drift.adapt: expected true or false, got "maybe"`,
		`type_error.bad.yaml:8: models[0].features: expected a list, got "pressure"`,
		`type_error.bad.yaml:9: models[0].window: expected a mapping, got 4000`,
	},
	"duplicate_name.bad.yaml": {
		`duplicate_name.bad.yaml:4: models[1].name: "pump" is already the name of models[0]`,
	},
	"duplicate_key.bad.yaml": {
		`duplicate_key.bad.yaml:5: models[0].loss: duplicate field (first set on line 4)`,
	},
	"missing_subject.bad.yaml": {
		`missing_subject.bad.yaml:4: models[1].subject: is required`,
		`missing_subject.bad.yaml:6: models[2].name: is required`,
	},
	"bad_duration.bad.yaml": {
		`bad_duration.bad.yaml:4: models[0].publish.heartbeat: 30 has no unit`,
		`bad_duration.bad.yaml:5: models[0].window.span: "2 hours" is not a duration`,
		`bad_duration.bad.yaml:6: models[0].drift.cooldown: expected a duration such as "30s" or "10m", got a list`,
	},
	"enum.bad.yaml": {
		`enum.bad.yaml:1: log.level: "verbose" is not allowed (allowed: debug, info, warn, error)`,
		`enum.bad.yaml:1: log.format: "xml" is not allowed (allowed: auto, text, json)`,
		`enum.bad.yaml:7: models[1].loss: "squard" is not allowed (allowed: squared, logistic)`,
		`enum.bad.yaml:8: models[1].penalty: "lassso" is not allowed (allowed: lasso, ridge, elastic-net)`,
		`enum.bad.yaml:9: models[1].missing: "zero" is not allowed (allowed: impute, reject)`,
		`enum.bad.yaml:10: models[1].retune.rule: "best" is not allowed (allowed: min, one-se)`,
		`enum.bad.yaml:11: models[1].learner.kind: "sgd" is not allowed (allowed: gram, saga, decay)`,
		`enum.bad.yaml:12: models[1].drift.performance: "ddm" is not allowed (allowed: adwin, page-hinkley, off)`,
		`enum.bad.yaml:16: models[2].learner.kind: gram needs loss squared, not "logistic" (allowed for "logistic": saga, decay)`,
	},
	"mix.bad.yaml": {
		`mix.bad.yaml:5: models[0].mix: is only for elastic-net (penalty is "lasso")`,
		`mix.bad.yaml:6: models[1].mix: is required for elastic-net (allowed: 0 < mix < 1)`,
		`mix.bad.yaml:12: models[2].mix: 1 is out of range (allowed: 0 < mix < 1)`,
	},
	"ranges.bad.yaml": {
		`ranges.bad.yaml:4: models[0].lambda: -0.1 is out of range (allowed: finite, >= 0)`,
		`ranges.bad.yaml:5: models[0].ladder.size: 0 is out of range (allowed: 1..100)`,
		`ranges.bad.yaml:5: models[0].ladder.floor: 1 is out of range (allowed: 0 < floor < 1)`,
		`ranges.bad.yaml:6: models[0].window.records: 5 is out of range (allowed: 10..10000000`,
		`ranges.bad.yaml:6: models[0].window.span: -1s is negative`,
		`ranges.bad.yaml:7: models[0].holdout.every: 1 is out of range (allowed: 0 = off, or >= 2)`,
		`ranges.bad.yaml:7: models[0].holdout.records: 3 is out of range (allowed: 10..10000000)`,
		`ranges.bad.yaml:8: models[0].retune.every: 0 is out of range (allowed: 1..`,
		`ranges.bad.yaml:9: models[0].learner.steps: 65 is out of range (allowed: 1..64)`,
		`ranges.bad.yaml:9: models[0].learner.idle_steps: -1 is out of range (allowed: 0..1048576)`,
		`ranges.bad.yaml:9: models[0].learner.half_life: 0 is out of range (allowed: finite, > 0)`,
		`ranges.bad.yaml:10: models[0].publish.heartbeat: 500ms is too short (allowed: >= 1s)`,
		`ranges.bad.yaml:10: models[0].publish.tolerance: -1 is out of range (allowed: finite, >= 0)`,
		`ranges.bad.yaml:11: models[0].max_features: 100001 is out of range (allowed: 1..100000`,
		`ranges.bad.yaml:12: models[0].queue: 0 is out of range (allowed: 1..1048576)`,
		`ranges.bad.yaml:13: models[0].drift.delta: 1 is out of range (allowed: 0 < delta < 1)`,
		`ranges.bad.yaml:13: models[0].drift.psi: 0 is out of range (allowed: finite, > 0)`,
		`ranges.bad.yaml:13: models[0].drift.mean_shift: -1 is out of range (allowed: finite, > 0)`,
		`ranges.bad.yaml:13: models[0].drift.cooldown: -1m0s is negative (allowed: >= 0s)`,
	},
	"threshold.bad.yaml": {
		`threshold.bad.yaml:4: models[0].score_subject: is only for logistic models (loss is "squared")`,
		`threshold.bad.yaml:5: models[0].threshold: is only for logistic models (loss is "squared")`,
		`threshold.bad.yaml:9: models[1].threshold.mode: "roc" is not allowed (allowed: fixed, fpr, precision)`,
		`threshold.bad.yaml:9: models[1].threshold.value: 1 is out of range (allowed: 0 < value < 1)`,
		`threshold.bad.yaml:9: models[1].threshold.target: 0 is out of range (allowed: 0 < target < 1)`,
	},
	"subjects.bad.yaml": {
		`subjects.bad.yaml:3: models[0].name: "pump*" is not a valid name (allowed: [a-z0-9][a-z0-9_-]*`,
		`subjects.bad.yaml:4: models[0].subject: "plant..x" has an empty token`,
		`subjects.bad.yaml:6: models[1].subject: "plant.>.x" has > before the last token`,
		`subjects.bad.yaml:8: models[2].subject: "plant.a*" has a token mixing * or > with other characters`,
		`subjects.bad.yaml:10: models[3].subject: "lariat.model.d" overlaps lariat's own output subjects lariat.>`,
		`subjects.bad.yaml:14: models[5].subject: "plant.e" is already used by models[4].subject`,
		`subjects.bad.yaml:18: models[6].score_subject: must differ from subject "plant.g"`,
		`subjects.bad.yaml:20: models[7].subject: "plant h" contains whitespace`,
	},
	"nats_auth.bad.yaml": {
		`nats_auth.bad.yaml:2: nats.url: scheme "http" is not allowed (allowed: nats, tls)`,
		`nats_auth.bad.yaml:5: nats.password_file: conflicts with password (allowed: one of password, password_file, password_env)`,
		`nats_auth.bad.yaml:6: nats.token: conflicts with user: use one authentication method`,
		`nats_auth.bad.yaml:7: nats.token_env: conflicts with token (allowed: one of token, token_file, token_env)`,
		`nats_auth.bad.yaml:7: nats.token_env: "1BAD" is not an environment variable name`,
		`nats_auth.bad.yaml:8: nats.tls.key_file: is required with cert_file`,
	},
	"embedded_auth.bad.yaml": {
		`embedded_auth.bad.yaml:2: nats.listen: "0.0.0.0:4222" is not a loopback address`,
		`embedded_auth.bad.yaml:3: nats.credentials_file: applies only to an external server`,
		`embedded_auth.bad.yaml:4: nats.tls: applies only to an external server`,
		`embedded_auth.bad.yaml:5: nats.pending_bytes: 1024 is out of range (allowed: >= 1048576`,
	},
	"http.bad.yaml": {
		`http.bad.yaml:2: http.listen: "8080" is not host:port`,
		`http.bad.yaml:4: http.admin_token_env: conflicts with admin_token_file`,
		`http.bad.yaml:5: http.max_body_bytes: 10 is out of range (allowed: 1024..1073741824)`,
	},
	"features.bad.yaml": {
		`features.bad.yaml:6: models[0].features[1]: is empty`,
		`features.bad.yaml:7: models[0].features[2]: "pressure" is already features[0]`,
		`features.bad.yaml:9: models[0].max_features: 3 is out of range (allowed: 4..100000`,
	},
	"guard.bad.yaml": {
		`guard.bad.yaml:6: models[0].guard.sd: 2 is out of range (allowed: 0 = off, or finite >= 3)`,
		`guard.bad.yaml:7: models[0].guard.warm: 1 is out of range (allowed: 2..10000000)`,
		`guard.bad.yaml:8: models[0].guard.persist: -1 is out of range (allowed: 0..1000000)`,
		`guard.bad.yaml:10: models[0].guard.bounds[0].min: 10 is above max 5 (allowed: min <= max)`,
		`guard.bad.yaml:11: models[0].guard.bounds[1].feature: "presure" is not one of features`,
		`guard.bad.yaml:12: models[0].guard.bounds[2]: sets neither min nor max`,
		`guard.bad.yaml:13: models[0].guard.bounds[3].feature: "pressure" is already bounded by bounds[0]`,
		`guard.bad.yaml:13: models[0].guard.bounds[3].min: +Inf is out of range (allowed: a finite number)`,
		`guard.bad.yaml:14: models[0].guard.bounds[4].feature: is required`,
		`guard.bad.yaml:15: models[0].guard.bounds[5].max: expected a number, got "high"`,
		`guard.bad.yaml:15: models[0].guard.bounds[5].feature: "flow" is already bounded by bounds[2]`,
		`guard.bad.yaml:16: models[0].guard.label.min: 3 is above max 2 (allowed: min <= max)`,
		`guard.bad.yaml:20: models[1].guard.label: is only for squared-loss models`,
	},
	"holdout_off.bad.yaml": {
		`holdout_off.bad.yaml:4: models[0].holdout.every: 0 (no holdout) needs a fixed lambda > 0 and threshold mode fixed`,
		`holdout_off.bad.yaml:9: models[1].holdout.every: 0 (no holdout) needs a fixed lambda > 0 and threshold mode fixed`,
	},
	"durability.bad.yaml": {
		`durability.bad.yaml:2: intake.mode: "sometimes" is not allowed (allowed: auto, durable, core)`,
		`durability.bad.yaml:3: intake.stream_prefix: "lariat.records" is not allowed`,
		`durability.bad.yaml:4: intake.max_age: 2m0s is too short (allowed: >= 5m0s`,
		`durability.bad.yaml:5: intake.max_bytes: 1000 is too small (allowed: >= 1048576)`,
		`durability.bad.yaml:7: checkpoint.records: 0 is out of range (allowed: 1..10000000)`,
		`durability.bad.yaml:13: models[1].subject: "plant.p7.trip" overlaps "plant.*.trip" of models[0]`,
	},
	"no_models.bad.yaml": {
		`no_models.bad.yaml:2: models: at least one model is required`,
	},
	"syntax.bad.yaml": {
		`syntax.bad.yaml:4: invalid YAML: did not find expected '-' indicator`,
	},
	"multidoc.bad.yaml": {
		`multidoc.bad.yaml:4: more than one YAML document`,
	},
	"instances.bad.yaml": {
		`instances.bad.yaml:5: models[0].instances.key_token: 3 is not a * token of subject "plant.*.trip" (allowed: the 1-based position of a * token)`,
		`instances.bad.yaml:6: models[0].instances.max: 0 is out of range (allowed: 1..1000000)`,
		`instances.bad.yaml:7: models[0].instances.idle: -1s is negative (allowed: >= 0s, 0 = never unload)`,
		`instances.bad.yaml:11: models[1].score_subject: is not offered for a template (instances.key_token > 0)`,
	},
	"checkpoint_store.bad.yaml": {
		`checkpoint_store.bad.yaml:2: checkpoint.store: "cloud" is not allowed (allowed: dir, bucket)`,
		`checkpoint_store.bad.yaml:3: checkpoint.bucket: "lariat.checkpoints" is not allowed (allowed: 1 to 32 letters, digits, '_' or '-')`,
		`checkpoint_store.bad.yaml:4: checkpoint.replicas: 7 is out of range (allowed: 1..5)`,
	},
	"shape.bad.yaml": {
		`shape.bad.yaml:1: nats: expected a mapping, got "nats://bus:4222"`,
		`shape.bad.yaml:3: models: expected a list, got a mapping`,
	},
}

func TestBadFiles(t *testing.T) {
	files, err := filepath.Glob("testdata/*.bad.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if len(files) < 10 {
		t.Fatalf("only %d bad files", len(files))
	}
	for _, f := range files {
		if _, ok := badFiles[filepath.Base(f)]; !ok {
			t.Errorf("%s has no entry in badFiles", f)
		}
	}
	for name, want := range badFiles {
		t.Run(name, func(t *testing.T) {
			c, err := Load(filepath.Join("testdata", name))
			if err == nil {
				t.Fatalf("loaded without error: %v", c)
			}
			if c != nil {
				t.Error("Load returned a Config with an error")
			}
			var es Errors
			if !errors.As(err, &es) {
				t.Fatalf("error is %T, not Errors: %v", err, err)
			}
			got := strings.Split(err.Error(), "\n")
			if len(got) != len(want) || len(es) != len(want) {
				t.Fatalf("got %d problems, want %d:\n%v", len(got), len(want), err)
			}
			for i := range want {
				if !strings.Contains(got[i], want[i]) {
					t.Errorf("problem %d:\n got  %s\n want %s", i, got[i], want[i])
				}
				if es[i].Line == 0 || es[i].File == "" {
					t.Errorf("problem %d has no file or line: %+v", i, *es[i])
				}
			}
		})
	}
}

func TestGoodFiles(t *testing.T) {
	files, err := filepath.Glob("testdata/*.good.yaml")
	if err != nil {
		t.Fatal(err)
	}
	files = append(files, "example.yaml", "demo.yaml")
	for _, f := range files {
		t.Run(filepath.Base(f), func(t *testing.T) {
			c, err := Load(f)
			if err != nil {
				t.Fatal(err)
			}
			if err := c.Validate(); err != nil {
				t.Fatalf("Validate after Load: %v", err)
			}
		})
	}
}
