#!/usr/bin/python3
"""The deployment files agree with the binaries they deploy.

Parses deploy/k8s/*.yaml (every file, each listed in kustomization.yaml),
deploy/compose.yaml and deploy/Dockerfile, then:
  * checks the wiring between them: ports, selectors, probe ports and service
    names, the security settings the files promise, and the drain period
    against the termination grace period;
  * checks that every RISKBOUND_* variable they set is one the binary
    documents (`riskbound-server --help`, or the CLI's `--help` for
    RISKBOUND_SERVER);
  * runs the real riskbound-server with each file's arguments and environment
    (listen address rewritten to 127.0.0.1:0 with RISKBOUND_PORT_FILE, since
    tests never use fixed ports), asks it over grpc.health.v1 for every service
    name a probe or HEALTHCHECK names, and checks it reports SERVING, then
    sends SIGTERM and checks exit code 0 within the drain period.

The gRPC health messages are encoded by hand on the protobuf wire format
(open standard, grpc/health/v1/health.proto: HealthCheckRequest.service is
field 1, HealthCheckResponse{status: SERVING} is 08 01).
"""
import argparse
import json
import os
import re
import shlex
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import unittest

import grpc
import yaml

ARGS = None
API_SERVICE = "riskbound.v1.RiskBound"
POD_LABELS = None  # the Deployment's pod template labels, set in setUpModule


def repo(*parts):
    return os.path.join(ARGS.repo, *parts)


def load_k8s():
    """{file name: [documents]} for every YAML file in deploy/k8s."""
    out = {}
    for name in sorted(os.listdir(repo("deploy", "k8s"))):
        if name.endswith((".yaml", ".yml")):
            with open(repo("deploy", "k8s", name)) as f:
                out[name] = [d for d in yaml.safe_load_all(f) if d is not None]
    return out


def by_kind(manifests, kind):
    return [d for docs in manifests.values() for d in docs if d.get("kind") == kind]


def parse_dockerfile(path):
    """The last stage's instructions as (KEYWORD, text) pairs, continuation
    lines joined, comments dropped; and ARG defaults of every stage."""
    lines, buf = [], ""
    with open(path) as f:
        for raw in f:
            s = raw.rstrip("\n")
            if not buf and (not s.strip() or s.lstrip().startswith("#")):
                continue
            if s.rstrip().endswith("\\"):
                buf += s.rstrip()[:-1] + " "
                continue
            lines.append(buf + s)
            buf = ""
    stages, args = [], {}
    for line in lines:
        keyword, _, rest = line.strip().partition(" ")
        keyword = keyword.upper()
        if keyword == "FROM":
            stages.append([])
        if keyword == "ARG" and "=" in rest:
            k, _, v = rest.strip().partition("=")
            args.setdefault(k, v)
        if stages:
            stages[-1].append((keyword, rest.strip()))
    return stages[-1], args


def dockerfile_env(instructions):
    env = {}
    for keyword, rest in instructions:
        if keyword == "ENV":
            for word in shlex.split(rest):
                k, _, v = word.partition("=")
                env[k] = v
    return env


def port_of(listen):
    host, _, port = listen.rpartition(":")
    return int(port)


def env_list_to_dict(env):
    return {e["name"]: e["value"] for e in env}


class Server:
    """riskbound-server started with a manifest's args and environment, the
    listen address moved to an ephemeral loopback port."""

    def __init__(self, args, env):
        self.dir = tempfile.mkdtemp(prefix="riskbound-deploy-")
        self.port_file = os.path.join(self.dir, "port")
        run_env = {"PATH": "/usr/bin:/bin"}
        run_env.update(env)
        run_env["RISKBOUND_LISTEN"] = "127.0.0.1:0"
        run_env["RISKBOUND_PORT_FILE"] = self.port_file
        self.log = open(os.path.join(self.dir, "server.log"), "w+")
        self.proc = subprocess.Popen([ARGS.server] + list(args), env=run_env,
                                     stdout=self.log, stderr=subprocess.STDOUT)
        deadline = time.monotonic() + 30
        while not (os.path.exists(self.port_file) and os.path.getsize(self.port_file) > 0):
            if self.proc.poll() is not None or time.monotonic() > deadline:
                self.kill()
                logs = self.close()
                raise AssertionError(
                    f"riskbound-server did not start with args {args} and environment {env} "
                    f"(listen moved to 127.0.0.1:0, RISKBOUND_PORT_FILE set): exit "
                    f"{self.proc.returncode}, log:\n{logs}")
            time.sleep(0.05)
        with open(self.port_file) as f:
            self.address = f"127.0.0.1:{int(f.read().strip())}"

    def logs(self):
        self.log.flush()
        self.log.seek(0)
        return self.log.read()

    def health(self, service):
        data = service.encode()
        request = b"\x0a" + bytes([len(data)]) + data if data else b""
        with grpc.insecure_channel(self.address) as channel:
            check = channel.unary_unary("/grpc.health.v1.Health/Check",
                                        request_serializer=lambda b: b,
                                        response_deserializer=lambda b: b)
            try:
                return check(request, timeout=10)
            except grpc.RpcError as e:
                return e.code()

    def stop(self, within_seconds):
        """SIGTERM; returns (exit code, seconds taken)."""
        start = time.monotonic()
        self.proc.send_signal(signal.SIGTERM)
        try:
            code = self.proc.wait(timeout=within_seconds)
        except subprocess.TimeoutExpired:
            self.kill()
            return None, time.monotonic() - start
        return code, time.monotonic() - start

    def kill(self):
        if self.proc.poll() is None:
            self.proc.kill()
            self.proc.wait()

    def close(self):
        """Removes the temporary files; returns the server's log."""
        logs = self.logs()
        self.log.close()
        shutil.rmtree(self.dir, ignore_errors=True)
        return logs


def run_and_probe(test, args, env, services, drain_seconds):
    server = Server(args, env)
    try:
        for service in services:
            test.assertEqual(server.health(service), b"\x08\x01",
                             f"health of service {service!r} with environment {env}")
    finally:
        code, secs = server.stop(within_seconds=drain_seconds + 10)
        logs = server.close()
    test.assertEqual(code, 0, f"exit code after SIGTERM (took {secs:.1f}s); log:\n{logs}")
    test.assertLessEqual(secs, drain_seconds)


def server_help():
    p = subprocess.run([ARGS.server, "--help"], capture_output=True, text=True, timeout=30)
    return p.stdout + p.stderr


def cli_help():
    p = subprocess.run([ARGS.cli, "health", "--help"], capture_output=True, text=True, timeout=30)
    return p.stdout + p.stderr


def selector_matches(selector, labels):
    return all(labels.get(k) == v for k, v in selector.items())


class KubernetesTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.manifests = load_k8s()
        deployments = by_kind(cls.manifests, "Deployment")
        assert len(deployments) == 1, "one Deployment"
        cls.deployment = deployments[0]
        cls.pod = cls.deployment["spec"]["template"]
        containers = cls.pod["spec"]["containers"]
        assert len(containers) == 1, "one container"
        cls.container = containers[0]
        cls.env = env_list_to_dict(cls.container.get("env", []))
        cls.ports = {p["name"]: p["containerPort"] for p in cls.container["ports"]}

    def test_kustomization_lists_every_file(self):
        (kustomization,) = self.manifests["kustomization.yaml"]
        self.assertEqual(kustomization["kind"], "Kustomization")
        listed = set(kustomization["resources"])
        present = set(self.manifests) - {"kustomization.yaml"}
        self.assertEqual(listed, present)
        # Each resource is a document Kubernetes can identify.
        for name in present:
            for d in self.manifests[name]:
                self.assertTrue(d.get("apiVersion") and d.get("kind") and d["metadata"]["name"],
                                name)
        image = self.container["image"].rsplit(":", 1)[0]
        self.assertIn(image, [i["name"] for i in kustomization.get("images", [])])

    def test_ports_agree(self):
        # One gRPC port: the listen address, the container port, both Services,
        # the probes and the NetworkPolicy all name it.
        self.assertEqual(set(self.ports), {"grpc"})
        grpc_port = self.ports["grpc"]
        self.assertEqual(port_of(self.env["RISKBOUND_LISTEN"]), grpc_port)
        self.assertTrue(self.env["RISKBOUND_LISTEN"].startswith("0.0.0.0:"),
                        "a pod listens on every interface")
        for probe in ("readinessProbe", "livenessProbe"):
            self.assertEqual(self.container[probe]["grpc"]["port"], grpc_port, probe)
        services = {s["metadata"]["name"]: s for s in by_kind(self.manifests, "Service")}
        self.assertEqual(set(services), {"riskbound", "riskbound-headless"})
        for name, s in services.items():
            self.assertTrue(selector_matches(s["spec"]["selector"], self.pod["metadata"]["labels"]),
                            name)
            (port,) = s["spec"]["ports"]
            self.assertIn(port["targetPort"], ("grpc", grpc_port), name)
            self.assertEqual(port["port"], grpc_port, name)
        self.assertEqual(services["riskbound"]["spec"].get("type", "ClusterIP"), "ClusterIP")
        self.assertEqual(services["riskbound-headless"]["spec"]["clusterIP"], "None")
        (policy,) = by_kind(self.manifests, "NetworkPolicy")
        self.assertTrue(selector_matches(policy["spec"]["podSelector"]["matchLabels"],
                                         self.pod["metadata"]["labels"]))
        self.assertEqual(policy["spec"]["policyTypes"], ["Ingress"])
        admitted = {(p["port"], p.get("protocol", "TCP"))
                    for rule in policy["spec"]["ingress"] for p in rule["ports"]}
        self.assertEqual(admitted, {(grpc_port, "TCP")}, "only the gRPC port is admitted")

    def test_probes_are_native_grpc(self):
        self.assertEqual(self.container["readinessProbe"]["grpc"].get("service"), API_SERVICE)
        self.assertIn(self.container["livenessProbe"]["grpc"].get("service", ""), ("", API_SERVICE))
        for probe in ("readinessProbe", "livenessProbe"):
            self.assertEqual(set(self.container[probe]) & {"exec", "httpGet", "tcpSocket"}, set())

    def test_security_and_resources(self):
        pod_sc = self.pod["spec"]["securityContext"]
        sc = self.container["securityContext"]
        self.assertTrue(pod_sc["runAsNonRoot"] and sc["runAsNonRoot"])
        self.assertNotEqual(pod_sc["runAsUser"], 0)
        self.assertTrue(sc["readOnlyRootFilesystem"])
        self.assertFalse(sc["allowPrivilegeEscalation"])
        self.assertEqual(sc["capabilities"]["drop"], ["ALL"])
        self.assertNotIn("add", sc["capabilities"])
        for kind in ("requests", "limits"):
            self.assertEqual(set(self.container["resources"][kind]), {"cpu", "memory"}, kind)
        # Service links would put RISKBOUND_SERVICE_HOST, RISKBOUND_PORT, ... in
        # the server's variable namespace.
        self.assertIs(self.pod["spec"]["enableServiceLinks"], False)
        self.assertNotIn("command", self.container, "the image's entrypoint runs the server")
        # The uid is the image's (deploy/Dockerfile USER).
        instructions, _ = parse_dockerfile(repo("deploy", "Dockerfile"))
        (user,) = [rest for k, rest in instructions if k == "USER"]
        self.assertEqual(user.split(":")[0], str(pod_sc["runAsUser"]))

    def test_grace_period_exceeds_the_drain(self):
        # docs/server.md: allow more than the drain period plus one second
        # between SIGTERM and SIGKILL.
        drain = int(self.env.get("RISKBOUND_DRAIN_SECONDS", "10"))
        self.assertGreater(self.pod["spec"]["terminationGracePeriodSeconds"], drain + 1)

    def test_autoscaler_and_disruption_budget(self):
        (hpa,) = by_kind(self.manifests, "HorizontalPodAutoscaler")
        self.assertEqual(hpa["apiVersion"], "autoscaling/v2")
        target = hpa["spec"]["scaleTargetRef"]
        self.assertEqual((target["kind"], target["name"]),
                         ("Deployment", self.deployment["metadata"]["name"]))
        self.assertLessEqual(2, hpa["spec"]["minReplicas"])
        self.assertLessEqual(hpa["spec"]["minReplicas"], hpa["spec"]["maxReplicas"])
        (metric,) = hpa["spec"]["metrics"]
        self.assertEqual((metric["type"], metric["resource"]["name"]), ("Resource", "cpu"))
        self.assertIn("cpu", self.container["resources"]["requests"],
                      "CPU utilization is relative to the request")
        (pdb,) = by_kind(self.manifests, "PodDisruptionBudget")
        self.assertTrue(selector_matches(pdb["spec"]["selector"]["matchLabels"],
                                         self.pod["metadata"]["labels"]))
        self.assertLess(pdb["spec"].get("maxUnavailable", 0), hpa["spec"]["minReplicas"])
        self.assertTrue(selector_matches(self.deployment["spec"]["selector"]["matchLabels"],
                                         self.pod["metadata"]["labels"]))

    def test_environment_is_documented_by_the_server(self):
        text = server_help()
        for name in self.env:
            self.assertRegex(text, r"\b" + re.escape(name) + r"\b", f"{name} in --help")

    def test_real_server_with_this_configuration(self):
        services = {"", self.container["livenessProbe"]["grpc"].get("service", ""),
                    self.container["readinessProbe"]["grpc"].get("service", "")}
        run_and_probe(self, self.container.get("args", []), self.env, sorted(services),
                      int(self.env.get("RISKBOUND_DRAIN_SECONDS", "10")))


class DockerfileTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.instructions, cls.args = parse_dockerfile(repo("deploy", "Dockerfile"))
        cls.env = dockerfile_env(cls.instructions)

    def only(self, keyword):
        found = [rest for k, rest in self.instructions if k == keyword]
        self.assertEqual(len(found), 1, keyword)
        return found[0]

    def test_runtime_stage(self):
        self.assertEqual(self.only("FROM"), "scratch")
        self.assertEqual(self.only("USER"), "10001:10001")
        self.assertEqual(self.only("STOPSIGNAL"), "SIGTERM")
        self.assertEqual(self.only("EXPOSE"), f"{port_of(self.env['RISKBOUND_LISTEN'])}/tcp")
        self.assertEqual(json.loads(self.only("ENTRYPOINT")), ["/usr/local/bin/riskbound-server"])

    def test_healthcheck_uses_the_cli_on_the_listen_port(self):
        words = self.only("HEALTHCHECK").split("CMD", 1)[1].strip()
        command = json.loads(words)
        self.assertEqual(command[:2], ["/usr/local/bin/riskbound", "health"])
        self.assertEqual(command[command.index("--service") + 1], API_SERVICE)
        # The probe asks RISKBOUND_SERVER, which must be the listen port on loopback.
        self.assertEqual(self.env["RISKBOUND_SERVER"],
                         f"127.0.0.1:{port_of(self.env['RISKBOUND_LISTEN'])}")
        self.assertIn("RISKBOUND_SERVER", cli_help())

    def test_labels(self):
        label = self.only("LABEL")
        for key in ("version", "revision", "source", "licenses", "title"):
            self.assertIn(f"org.opencontainers.image.{key}=", label)
        # The default version is the project's (CMakeLists.txt project()).
        with open(repo("CMakeLists.txt")) as f:
            version = re.search(r"project\(riskbound VERSION ([0-9.]+)", f.read()).group(1)
        self.assertEqual(self.args["RISKBOUND_VERSION"], version)
        k8s = load_k8s()
        (kustomization,) = k8s["kustomization.yaml"]
        self.assertEqual(kustomization["images"][0]["newTag"], version)

    def test_environment_is_documented_by_the_server(self):
        text = server_help()
        for name in self.env:
            if name in ("PATH", "RISKBOUND_SERVER"):
                continue
            self.assertRegex(text, r"\b" + re.escape(name) + r"\b", f"{name} in --help")

    def test_real_server_with_this_configuration(self):
        env = {k: v for k, v in self.env.items() if k.startswith("RISKBOUND_")}
        run_and_probe(self, [], env, ["", API_SERVICE],
                      int(env.get("RISKBOUND_DRAIN_SECONDS", "10")))


class ComposeTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        with open(repo("deploy", "compose.yaml")) as f:
            cls.compose = yaml.safe_load(f)
        cls.server = cls.compose["services"]["server"]
        cls.client = cls.compose["services"]["certify-demo"]

    def test_wiring(self):
        listen_port = port_of(self.server["environment"]["RISKBOUND_LISTEN"])
        (published,) = self.server["ports"]
        self.assertTrue(published.startswith("127.0.0.1:"), "published on loopback only")
        self.assertEqual(int(published.rsplit(":", 1)[1]), listen_port)
        self.assertEqual(self.client["environment"]["RISKBOUND_SERVER"], f"server:{listen_port}")
        self.assertEqual(self.client["depends_on"]["server"]["condition"], "service_healthy")
        self.assertEqual(self.server["build"]["dockerfile"], "deploy/Dockerfile")
        self.assertEqual(self.server["image"], self.client["image"])
        self.assertGreater(int(self.server["stop_grace_period"].rstrip("s")),
                           int(self.server["environment"].get("RISKBOUND_DRAIN_SECONDS", "10")))
        # Health is the image's HEALTHCHECK (no shell in the image, so no
        # compose-level override that an engine might wrap in /bin/sh -c).
        self.assertNotIn("healthcheck", self.server)
        # The default image is the one kustomization.yaml and the docs name.
        with open(repo("CMakeLists.txt")) as f:
            version = re.search(r"project\(riskbound VERSION ([0-9.]+)", f.read()).group(1)
        self.assertEqual(self.server["image"],
                         "${RISKBOUND_IMAGE:-localhost/riskbound:" + version + "}")

    def test_client_certifies_a_demo_file(self):
        command = self.client["command"]
        self.assertEqual(command[0], "certify")
        path = command[command.index("--input") + 1]
        (volume,) = self.client["volumes"]
        host, container, _ = volume.split(":")
        self.assertTrue(path.startswith(container + "/"))
        local = os.path.normpath(os.path.join(repo("deploy"), host, path[len(container) + 1:]))
        self.assertTrue(os.path.isfile(local), local)
        # The command is one the CLI accepts (its parser, no server needed:
        # --help after valid flags still parses them first).
        p = subprocess.run([ARGS.cli] + command[:1] + ["--help"], capture_output=True, text=True,
                           timeout=30)
        self.assertEqual(p.returncode, 0)
        self.assertIn("--input", p.stdout)
        self.assertIn("RISKBOUND_SERVER", cli_help())

    def test_environment_is_documented_by_the_server(self):
        text = server_help()
        for name in self.server["environment"]:
            self.assertRegex(text, r"\b" + re.escape(name) + r"\b", f"{name} in --help")

    def test_real_server_with_this_configuration(self):
        env = {k: str(v) for k, v in self.server["environment"].items()}
        run_and_probe(self, [], env, ["", API_SERVICE],
                      int(env.get("RISKBOUND_DRAIN_SECONDS", "10")))


if __name__ == "__main__":
    parser = argparse.ArgumentParser()
    parser.add_argument("--server", required=True)
    parser.add_argument("--cli", required=True)
    parser.add_argument("--repo", required=True)
    ARGS, rest = parser.parse_known_args()
    unittest.main(argv=[sys.argv[0]] + rest, verbosity=2)
