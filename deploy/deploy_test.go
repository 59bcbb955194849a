// Package deploy checks the deployment files: every Kubernetes manifest
// decodes strictly into its k8s.io/api type, and the cross-references hold
// (labels, ports, probe paths that the service serves, the HPA target).
// It is a module of its own so that the main module carries no Kubernetes
// dependencies: run it with (cd deploy && go test ./...).
package deploy

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"

	appsv1 "k8s.io/api/apps/v1"
	autoscalingv2 "k8s.io/api/autoscaling/v2"
	corev1 "k8s.io/api/core/v1"
	networkingv1 "k8s.io/api/networking/v1"
	policyv1 "k8s.io/api/policy/v1"
	"k8s.io/apimachinery/pkg/api/resource"
	"k8s.io/apimachinery/pkg/util/intstr"
	"sigs.k8s.io/yaml"
)

// strict decodes a YAML file into v, refusing unknown fields.
func strict(t *testing.T, path string, v any) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	j, err := yaml.YAMLToJSON(b)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	dec := json.NewDecoder(bytes.NewReader(j))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
}

type kustomization struct {
	APIVersion string   `json:"apiVersion"`
	Kind       string   `json:"kind"`
	Namespace  string   `json:"namespace"`
	Resources  []string `json:"resources"`
}

// servedPaths lists the paths of the OpenAPI document, the service's contract
// (its coverage test checks that the router serves exactly these).
func servedPaths(t *testing.T) []string {
	b, err := os.ReadFile("../openapi/openapi.yaml")
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Paths map[string]any `json:"paths"`
	}
	if err := yaml.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	var out []string
	for p := range doc.Paths {
		out = append(out, p)
	}
	return out
}

func TestKubernetesManifests(t *testing.T) {
	dir := "kubernetes"
	var k kustomization
	strict(t, filepath.Join(dir, "kustomization.yaml"), &k)
	files, _ := filepath.Glob(filepath.Join(dir, "*.yaml"))
	for _, f := range files {
		base := filepath.Base(f)
		if base != "kustomization.yaml" && !slices.Contains(k.Resources, base) {
			t.Errorf("%s is not listed in kustomization.yaml", base)
		}
	}
	for _, r := range k.Resources {
		if _, err := os.Stat(filepath.Join(dir, r)); err != nil {
			t.Errorf("kustomization.yaml lists %s: %v", r, err)
		}
	}

	var ns corev1.Namespace
	var dep appsv1.Deployment
	var svc corev1.Service
	var hpa autoscalingv2.HorizontalPodAutoscaler
	var pdb policyv1.PodDisruptionBudget
	var np networkingv1.NetworkPolicy
	strict(t, filepath.Join(dir, "namespace.yaml"), &ns)
	strict(t, filepath.Join(dir, "deployment.yaml"), &dep)
	strict(t, filepath.Join(dir, "service.yaml"), &svc)
	strict(t, filepath.Join(dir, "hpa.yaml"), &hpa)
	strict(t, filepath.Join(dir, "pdb.yaml"), &pdb)
	strict(t, filepath.Join(dir, "networkpolicy.yaml"), &np)
	if ns.Name != k.Namespace {
		t.Errorf("namespace %q, kustomization %q", ns.Name, k.Namespace)
	}

	// Deployment: replicas, probes, security, resources, GOMAXPROCS.
	if dep.Spec.Replicas == nil || *dep.Spec.Replicas < 2 {
		t.Error("fewer than 2 replicas")
	}
	podLabels := dep.Spec.Template.Labels
	for k, v := range dep.Spec.Selector.MatchLabels {
		if podLabels[k] != v {
			t.Errorf("the Deployment's selector %s=%s does not match its pods", k, v)
		}
	}
	if len(dep.Spec.Template.Spec.Containers) != 1 {
		t.Fatal("one container expected")
	}
	c := dep.Spec.Template.Spec.Containers[0]
	var port, metricsPort corev1.ContainerPort
	for _, p := range c.Ports {
		switch p.Name {
		case "http":
			port = p
		case "metrics":
			metricsPort = p
		}
	}
	if port.ContainerPort == 0 || metricsPort.ContainerPort == 0 || port.ContainerPort == metricsPort.ContainerPort {
		t.Fatal("want two distinct ports, named http and metrics")
	}
	env := map[string]corev1.EnvVar{}
	for _, e := range c.Env {
		env[e.Name] = e
	}
	if !strings.HasSuffix(env["EIVFIT_ADDR"].Value, ":"+itoa(int(port.ContainerPort))) || !strings.HasPrefix(env["EIVFIT_ADDR"].Value, "0.0.0.0:") {
		t.Errorf("EIVFIT_ADDR %q does not listen on the container port %d", env["EIVFIT_ADDR"].Value, port.ContainerPort)
	}
	// /metrics has its own listener: the main port serves none, so API keys
	// guard every data path and the scrape needs no key.
	if !strings.HasSuffix(env["EIVFIT_METRICS_ADDR"].Value, ":"+itoa(int(metricsPort.ContainerPort))) {
		t.Errorf("EIVFIT_METRICS_ADDR %q does not listen on the metrics port %d", env["EIVFIT_METRICS_ADDR"].Value, metricsPort.ContainerPort)
	}
	if g := env["GOMAXPROCS"]; g.ValueFrom == nil || g.ValueFrom.ResourceFieldRef == nil || g.ValueFrom.ResourceFieldRef.Resource != "limits.cpu" {
		t.Error("GOMAXPROCS does not follow limits.cpu")
	}
	memLimit := c.Resources.Limits[corev1.ResourceMemory]
	if gml, err := resource.ParseQuantity(strings.Replace(env["GOMEMLIMIT"].Value, "MiB", "Mi", 1)); err != nil || gml.Cmp(memLimit) >= 0 {
		t.Errorf("GOMEMLIMIT %q must be set below limits.memory %s", env["GOMEMLIMIT"].Value, memLimit.String())
	}
	for _, r := range []corev1.ResourceName{corev1.ResourceCPU, corev1.ResourceMemory} {
		req, lim := c.Resources.Requests[r], c.Resources.Limits[r]
		if req.IsZero() || lim.IsZero() || req.Cmp(lim) > 0 {
			t.Errorf("%s: request %s, limit %s", r, req.String(), lim.String())
		}
	}
	served := servedPaths(t)
	for name, p := range map[string]*corev1.Probe{"readiness": c.ReadinessProbe, "liveness": c.LivenessProbe} {
		if p == nil || p.HTTPGet == nil {
			t.Errorf("no %s probe", name)
			continue
		}
		if !slices.Contains(served, p.HTTPGet.Path) {
			t.Errorf("%s probe path %s is not served", name, p.HTTPGet.Path)
		}
		if !portMatches(p.HTTPGet.Port, port) {
			t.Errorf("%s probe port %s", name, p.HTTPGet.Port.String())
		}
	}
	if c.ReadinessProbe.HTTPGet.Path != "/readyz" || c.LivenessProbe.HTTPGet.Path != "/healthz" {
		t.Error("readiness must probe /readyz and liveness /healthz")
	}
	psc, sc := dep.Spec.Template.Spec.SecurityContext, c.SecurityContext
	if psc == nil || psc.RunAsNonRoot == nil || !*psc.RunAsNonRoot {
		t.Error("runAsNonRoot is not set")
	}
	if sc == nil || sc.ReadOnlyRootFilesystem == nil || !*sc.ReadOnlyRootFilesystem ||
		sc.AllowPrivilegeEscalation == nil || *sc.AllowPrivilegeEscalation ||
		sc.Capabilities == nil || !slices.Contains(sc.Capabilities.Drop, "ALL") {
		t.Error("the container must have a read-only root filesystem, no privilege escalation and drop ALL capabilities")
	}
	ann := dep.Spec.Template.Annotations
	if ann["prometheus.io/scrape"] != "true" || ann["prometheus.io/path"] != "/metrics" || ann["prometheus.io/port"] != itoa(int(metricsPort.ContainerPort)) ||
		!slices.Contains(served, "/metrics") {
		t.Errorf("Prometheus scrape annotations %v", ann)
	}

	// Service, HPA, PDB, NetworkPolicy point at the Deployment's pods and port.
	if !selects(svc.Spec.Selector, podLabels) {
		t.Error("the Service selects no pod of the Deployment")
	}
	for _, p := range svc.Spec.Ports {
		if !portMatches(p.TargetPort, port) {
			t.Errorf("Service targetPort %s is not the container port (the metrics port stays off the Service)", p.TargetPort.String())
		}
	}
	if hpa.Spec.ScaleTargetRef.Kind != "Deployment" || hpa.Spec.ScaleTargetRef.Name != dep.Name || hpa.Spec.ScaleTargetRef.APIVersion != "apps/v1" {
		t.Errorf("HPA target %+v", hpa.Spec.ScaleTargetRef)
	}
	if len(hpa.Spec.Metrics) == 0 || hpa.Spec.Metrics[0].Resource == nil || hpa.Spec.Metrics[0].Resource.Name != corev1.ResourceCPU {
		t.Error("the HPA does not scale on CPU")
	}
	if hpa.Spec.MinReplicas == nil || *hpa.Spec.MinReplicas < *dep.Spec.Replicas {
		t.Error("HPA minReplicas below the Deployment's replicas")
	}
	if pdb.Spec.Selector == nil || !selects(pdb.Spec.Selector.MatchLabels, podLabels) {
		t.Error("the PodDisruptionBudget selects no pod")
	}
	if pdb.Spec.MinAvailable == nil || pdb.Spec.MinAvailable.IntValue() >= int(*dep.Spec.Replicas) {
		t.Error("the PodDisruptionBudget would block every eviction")
	}
	if !selects(np.Spec.PodSelector.MatchLabels, podLabels) {
		t.Error("the NetworkPolicy selects no pod")
	}
	admitted := func(cp corev1.ContainerPort) bool {
		for _, in := range np.Spec.Ingress {
			for _, p := range in.Ports {
				if p.Port != nil && portMatches(*p.Port, cp) {
					return true
				}
			}
		}
		return false
	}
	if !admitted(port) || !admitted(metricsPort) {
		t.Error("the NetworkPolicy does not admit the HTTP and metrics ports")
	}
}

func portMatches(p intstr.IntOrString, cp corev1.ContainerPort) bool {
	if p.Type == intstr.String {
		return p.StrVal == cp.Name
	}
	return p.IntVal == cp.ContainerPort
}

func selects(sel, labels map[string]string) bool {
	if len(sel) == 0 {
		return false
	}
	for k, v := range sel {
		if labels[k] != v {
			return false
		}
	}
	return true
}

func itoa(i int) string { return strconv.Itoa(i) }

// The image listens where the manifests expect and runs as non-root.
func TestDockerfile(t *testing.T) {
	b, err := os.ReadFile("Dockerfile")
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	for _, want := range []string{"CGO_ENABLED=0", "ENV EIVFIT_ADDR=0.0.0.0:8080", "USER 65532", `ENTRYPOINT ["/eivfit", "serve"]`} {
		if !strings.Contains(s, want) {
			t.Errorf("Dockerfile lacks %q", want)
		}
	}
	if regexp.MustCompile(`(?m)^HEALTHCHECK`).MatchString(s) {
		t.Error("the image must not carry a HEALTHCHECK")
	}
}

// The systemd unit is hardened.
func TestSystemdUnit(t *testing.T) {
	b, err := os.ReadFile("systemd/eivfit.service")
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	for _, want := range []string{"DynamicUser=yes", "ProtectSystem=strict", "NoNewPrivileges=yes", "EnvironmentFile=/etc/eivfit/eivfit.env",
		"ExecStart=/usr/local/bin/eivfit serve", "CapabilityBoundingSet=", "PrivateTmp=yes"} {
		if !strings.Contains(s, want) {
			t.Errorf("eivfit.service lacks %q", want)
		}
	}
	// /metrics on a loopback listener of its own, apart from the main one.
	b, err = os.ReadFile("systemd/eivfit.env")
	if err != nil {
		t.Fatal(err)
	}
	env := map[string]string{}
	for _, l := range strings.Split(string(b), "\n") {
		if k, v, ok := strings.Cut(strings.TrimSpace(l), "="); ok && !strings.HasPrefix(k, "#") {
			env[k] = v
		}
	}
	if m := env["EIVFIT_METRICS_ADDR"]; !strings.HasPrefix(m, "127.0.0.1:") || m == env["EIVFIT_ADDR"] {
		t.Errorf("eivfit.env: EIVFIT_METRICS_ADDR %q must be a loopback address apart from EIVFIT_ADDR %q", m, env["EIVFIT_ADDR"])
	}
}

// The single-replica SQLite variant: one replica, recreated (never two pods
// on one ReadWriteOnce volume), the data directory on the claim it defines,
// and every resource it names present.
func TestKubernetesSQLiteVariant(t *testing.T) {
	dir := filepath.Join("kubernetes", "sqlite")
	var k struct {
		kustomization
		Patches []struct {
			Path string `json:"path"`
		} `json:"patches"`
	}
	strict(t, filepath.Join(dir, "kustomization.yaml"), &k)
	for _, r := range k.Resources {
		if _, err := os.Stat(filepath.Join(dir, r)); err != nil {
			t.Errorf("sqlite/kustomization.yaml lists %s: %v", r, err)
		}
	}
	var pvc corev1.PersistentVolumeClaim
	strict(t, filepath.Join(dir, "pvc.yaml"), &pvc)
	if len(k.Patches) != 1 {
		t.Fatalf("one patch expected, got %d", len(k.Patches))
	}
	b, err := os.ReadFile(filepath.Join(dir, k.Patches[0].Path))
	if err != nil {
		t.Fatal(err)
	}
	var dep appsv1.Deployment // a strategic-merge patch: $patch keys are not fields
	if err := yaml.Unmarshal(b, &dep); err != nil {
		t.Fatal(err)
	}
	if dep.Spec.Replicas == nil || *dep.Spec.Replicas != 1 || dep.Spec.Strategy.Type != appsv1.RecreateDeploymentStrategyType {
		t.Error("the SQLite variant must run one replica, recreated")
	}
	c := dep.Spec.Template.Spec.Containers[0]
	dataDir := ""
	for _, e := range c.Env {
		if e.Name == "EIVFIT_DATA_DIR" {
			dataDir = e.Value
		}
	}
	vols := dep.Spec.Template.Spec.Volumes
	if len(c.VolumeMounts) != 1 || c.VolumeMounts[0].MountPath != dataDir || len(vols) != 1 ||
		vols[0].PersistentVolumeClaim == nil || vols[0].PersistentVolumeClaim.ClaimName != pvc.Name {
		t.Errorf("EIVFIT_DATA_DIR %q is not the mount of claim %q", dataDir, pvc.Name)
	}
}
