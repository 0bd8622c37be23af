package config

import (
	"net"
	"net/url"
	"strconv"
	"strings"
	"unicode"
)

// checkSubject returns why s is not a valid NATS subject ("" if it is).
// Tokens are separated by dots and may not be empty or contain whitespace;
// with wildcards, a token may be * (one token) or, last, > (the rest).
func checkSubject(s string, wildcards bool) string {
	if s == "" {
		return "is empty"
	}
	if strings.IndexFunc(s, func(r rune) bool { return unicode.IsSpace(r) || unicode.IsControl(r) }) >= 0 {
		return "contains whitespace or a control character (allowed: NATS subject tokens separated by dots)"
	}
	toks := strings.Split(s, ".")
	for i, t := range toks {
		switch {
		case t == "":
			return "has an empty token (allowed: tokens separated by single dots, no leading or trailing dot)"
		case (t == "*" || t == ">") && !wildcards:
			return "contains a wildcard (allowed: no * or > here)"
		case t == ">" && i != len(toks)-1:
			return "has > before the last token (allowed: > only as the last token)"
		case t != "*" && t != ">" && strings.ContainsAny(t, "*>"):
			return "has a token mixing * or > with other characters (allowed: * and > only as whole tokens)"
		}
	}
	return ""
}

// overlap reports whether some subject matches both patterns a and b.
func overlap(a, b string) bool {
	ta, tb := strings.Split(a, "."), strings.Split(b, ".")
	for i := 0; ; i++ {
		switch {
		case i == len(ta) && i == len(tb):
			return true
		case i == len(ta) || i == len(tb):
			return false
		case ta[i] == ">" || tb[i] == ">":
			return true
		case ta[i] != "*" && tb[i] != "*" && ta[i] != tb[i]:
			return false
		}
	}
}

// checkNATSURL returns why u is not a usable NATS server URL ("" if it is).
// The message never repeats the URL, which may hold a password.
func checkNATSURL(u string) string {
	if u == "" {
		return "has an empty entry (allowed: URLs separated by commas)"
	}
	p, err := url.Parse(u)
	if err != nil || p.Host == "" {
		return "an entry is not a URL such as nats://host:4222"
	}
	if s := strings.ToLower(p.Scheme); s != "nats" && s != "tls" {
		return "scheme " + strconv.Quote(p.Scheme) + " is not allowed (allowed: nats, tls)"
	}
	if port := p.Port(); port != "" {
		if n, err := strconv.Atoi(port); err != nil || n < 1 || n > 65535 {
			return "port " + strconv.Quote(port) + " is out of range (allowed: 1..65535)"
		}
	}
	return ""
}

// urlHasUser reports whether any URL in the comma-separated list carries
// user info (user:password, or a token as the user).
func urlHasUser(list string) bool {
	for _, u := range strings.Split(list, ",") {
		if p, err := url.Parse(strings.TrimSpace(u)); err == nil && p.User != nil {
			return true
		}
	}
	return false
}

// redactURL replaces the user info of every URL in the list by [redacted];
// an entry that does not parse but has an @ is redacted whole. Entries
// without user info are kept verbatim.
func redactURL(list string) string {
	if list == "" {
		return ""
	}
	parts := strings.Split(list, ",")
	for i, u := range parts {
		trimmed := strings.TrimSpace(u)
		lead := u[:strings.Index(u, trimmed)]
		p, err := url.Parse(trimmed)
		switch {
		case err != nil && strings.Contains(u, "@"):
			parts[i] = lead + redacted
		case err == nil && p.User != nil:
			p.User = nil
			s := p.String()
			if j := strings.Index(s, "//"); j >= 0 {
				s = s[:j+2] + redacted + "@" + s[j+2:]
			}
			parts[i] = lead + s
		}
	}
	return strings.Join(parts, ",")
}

// checkListen returns why addr is not a host:port to listen on ("" if it
// is). The embedded NATS server must listen on loopback and may use port
// -1 (random, as nats-server does).
func checkListen(addr string, loopback bool) string {
	host, port, err := net.SplitHostPort(addr)
	if err != nil {
		return "is not host:port (allowed: e.g. 127.0.0.1:8080, [::1]:8080, :8080)"
	}
	lo := 0
	if loopback {
		lo = -1
	}
	if n, err := strconv.Atoi(port); err != nil || n < lo || n > 65535 {
		return "has port " + strconv.Quote(port) + " out of range (allowed: " + strconv.Itoa(lo) + "..65535, 0 = random)"
	}
	if !loopback {
		return ""
	}
	if host == "localhost" {
		return ""
	}
	if ip := net.ParseIP(host); ip == nil || !ip.IsLoopback() {
		return "is not a loopback address (allowed: 127.0.0.1, ::1 or localhost; the embedded server is local only)"
	}
	return ""
}
