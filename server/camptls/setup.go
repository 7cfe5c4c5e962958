package camptls

import (
	"fmt"
	"html/template"
	"net/http"
	"strings"

	qrcode "github.com/skip2/go-qrcode"
)

// Setup serves the plain-HTTP setup page that walks a crew member through
// trusting the camp authority on a phone, then opening the app over HTTPS.
// Addresses are the HTTPS addresses to offer, the first being the one the
// QR code shows.
type Setup struct {
	CAPEM     []byte
	Addresses []string // e.g. "https://192.168.4.10:8443"
}

// Routes on the setup server.
const (
	SetupPath  = "/setup"
	CAPath     = "/setup/camp-ca.crt"
	QRPath     = "/setup/address.png"
	StylePath  = "/setup/setup.css"
	qrSizePx   = 320
	setupStyle = `body{font-family:system-ui,sans-serif;max-width:40rem;margin:0 auto;padding:12px;font-size:18px;line-height:1.4;color:#0d1a14}
h1{font-size:1.5rem}h2{font-size:1.2rem;margin-top:1.5em}
a.button{display:block;text-align:center;background:#12372a;color:#fff;padding:16px;border-radius:10px;font-weight:800;text-decoration:none;margin:12px 0}
img{display:block;width:100%;max-width:320px;margin:12px auto;image-rendering:pixelated}
code{font-size:1.1rem;word-break:break-all}.caution{border-left:4px solid #8a4b00;padding-left:10px}
li{margin-bottom:6px}`
)

var setupPage = template.Must(template.New("setup").Parse(`<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Set up this phone for tagtally</title>
<link rel="stylesheet" href="` + StylePath + `">
</head><body>
<h1>Set up this phone for the camp server</h1>
{{if .CAPEM}}<p>The field app works offline only over a secure connection. This camp server
signs its own certificate, so each phone must trust the camp's certificate
authority once. It is made on this laptop and is trusted only by phones that
install it.</p>

<h2>1. Download the camp certificate</h2>
<a class="button" href="` + CAPath + `">Download camp certificate</a>

<h2>2. Trust it</h2>
<p><strong>Android</strong> (menus differ a little between makers):</p>
<ol>
<li>Open Settings, search for <em>CA certificate</em> (often under Security, Encryption &amp; credentials, Install a certificate).</li>
<li>Choose <em>CA certificate</em>, accept the warning, and pick the downloaded file <code>camp-ca.crt</code>.</li>
</ol>
<p><strong>iPhone and iPad</strong>:</p>
<ol>
<li>Open the download in Safari and allow the configuration profile to be downloaded.</li>
<li>Settings, <em>Profile Downloaded</em>, Install.</li>
<li>Settings, General, About, Certificate Trust Settings: switch on full trust for the tagtally camp authority.</li>
</ol>

{{else}}<p>The field app works offline only over a secure connection. This server
uses its own certificate, so phones that trust its issuer can open the app directly.</p>
{{end}}<h2>{{if .CAPEM}}3. {{end}}Open the app</h2>
{{range $i, $a := .Addresses}}{{if eq $i 0}}<img src="` + QRPath + `" alt="QR code of {{$a}}">{{end}}
<a class="button" href="{{$a}}">Open {{$a}}</a>{{end}}
{{if not .Addresses}}<p>This laptop has no network address that phones can reach. Join it to the camp Wi-Fi and reload this page.</p>{{end}}
<p>Then add it to the home screen (browser menu, <em>Add to Home screen</em>):
some phone browsers clear a website's stored records after days without use,
but keep them for apps on the home screen.</p>

<h2>Before handling animals</h2>
<p class="caution">Work only under your study's permits and animal-welfare approval,
handle animals only with the training this species needs, and follow local
rules and your licence conditions: they override this app.</p>
</body></html>
`))

// ServeHTTP serves the page, the certificate, the QR code and the style.
func (s *Setup) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	if r.Method != http.MethodGet && r.Method != http.MethodHead {
		http.Error(w, "only GET is served here", http.StatusMethodNotAllowed)
		return
	}
	w.Header().Set("X-Content-Type-Options", "nosniff")
	w.Header().Set("X-Frame-Options", "DENY")
	w.Header().Set("Referrer-Policy", "no-referrer")
	w.Header().Set("Content-Security-Policy", "default-src 'self'; img-src 'self'; style-src 'self'; frame-ancestors 'none'")
	switch strings.TrimSuffix(r.URL.Path, "/") {
	case SetupPath, "":
		w.Header().Set("Content-Type", "text/html; charset=utf-8")
		w.Header().Set("Cache-Control", "no-cache")
		if err := setupPage.Execute(w, s); err != nil {
			http.Error(w, "setup page failed", http.StatusInternalServerError)
		}
	case CAPath:
		if len(s.CAPEM) == 0 {
			http.NotFound(w, r)
			return
		}
		w.Header().Set("Content-Type", "application/x-x509-ca-cert")
		w.Header().Set("Content-Disposition", `attachment; filename="camp-ca.crt"`)
		w.Write(s.CAPEM)
	case QRPath:
		if len(s.Addresses) == 0 {
			http.NotFound(w, r)
			return
		}
		png, err := qrcode.Encode(s.Addresses[0], qrcode.Medium, qrSizePx)
		if err != nil {
			http.Error(w, fmt.Sprintf("QR code: %v", err), http.StatusInternalServerError)
			return
		}
		w.Header().Set("Content-Type", "image/png")
		w.Write(png)
	case StylePath:
		w.Header().Set("Content-Type", "text/css; charset=utf-8")
		w.Write([]byte(setupStyle))
	default:
		http.NotFound(w, r)
	}
}
